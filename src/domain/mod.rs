//! Pure computation: the trade's formulas and rules, with no I/O, no SQL, no
//! terminal and no clock (every "now" is passed in).

pub mod anode;
pub mod cathode;
pub mod charge;
pub mod electrochem;
pub mod entry;
pub mod forecast;
pub mod history;
pub mod layout;
pub mod levelling;
pub mod outlook;
pub mod plan;
pub mod plan_diff;
pub mod plant_time;
pub mod smoothing;
