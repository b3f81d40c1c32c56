//! tankbook: the shift book of a copper electrorefinery tankhouse. Layers, one
//! direction: `domain` ← `store` ← `plant` ← `cli` (and the screens).
#![forbid(unsafe_code)]

pub mod cli;
pub mod demo;
pub mod domain;
pub mod plant;
pub mod report;
pub mod store;
pub mod tui;
