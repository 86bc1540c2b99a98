//! Chemistry layer: end-group analysis, batch recipes, the condensation-water balance, the
//! Carothers and Stockmayer gel points and the hydroxyl-method table. Pure calculations, no I/O
//! besides parsing a recipe text; may use `support` and `error` only.

pub mod analysis;
pub mod gel;
pub mod hydroxyl_method;
pub mod ranges;
pub mod recipe;
pub mod stepgrowth;
