//! Published data sets the statistics tests share (each with its source).

/// Chemical process concentration, 20 individual measurements: Montgomery & Runger, Applied
/// Statistics and Probability for Engineers (3rd ed.), §16-6, Table 16-3.
pub const CONCENTRATION: [f64; 20] = [
    102.0, 94.8, 98.3, 98.4, 102.0, 98.5, 99.0, 97.7, 100.0, 98.1, 101.3, 98.7, 101.1, 98.4, 97.0,
    96.7, 100.3, 101.4, 97.2, 101.0,
];
