//! Pure computation: the trade's formulas and rules, with no I/O, no SQL, no
//! terminal and no clock (every "now" is passed in).

pub mod anode;
pub mod backtest;
pub mod balance;
pub mod cathode;
pub mod charge;
pub mod electrochem;
pub mod entry;
pub mod forecast;
pub mod history;
pub mod layout;
pub mod learn;
pub mod levelling;
pub mod outlook;
pub mod patrol;
pub mod plan;
pub mod plan_diff;
pub mod plant_time;
pub mod shift;
pub mod smoothing;
