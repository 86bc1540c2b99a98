//! Cook layer (in-process control): cook samples, step-growth rate laws and their fit,
//! end-point prediction, Arrhenius, correction additions, the cook chart and the safety text.
//! May use `spec`, `chem`, `stats`, `support` and `error`.

pub mod arrhenius;
pub mod chart;
pub mod correction;
pub mod fit;
pub mod kinetics;
pub mod samples;
