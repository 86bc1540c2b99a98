//! Root finding by bisection, shared by the Student t quantile and the cook's target searches.

/// Bisection on the bracket [`lo`, `hi`]: at most 200 halvings, each evaluating
/// `root_above(mid)` (true: the root lies above `mid`, so `lo = mid`; false: `hi = mid`) and
/// stopping early once `done(lo, hi)`; returns the midpoint 0.5·(lo + hi) of the last bracket.
/// The first error of `root_above` is returned as it is.
///
/// Source: W. H. Press et al., Numerical Recipes, 3rd ed., §9.1 (bisection; the bracket halves
/// each step, so 200 steps reach the resolution of an f64 from any finite bracket).
pub fn bisect<E>(
    mut lo: f64,
    mut hi: f64,
    mut root_above: impl FnMut(f64) -> Result<bool, E>,
    done: impl Fn(f64, f64) -> bool,
) -> Result<f64, E> {
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if root_above(mid)? {
            lo = mid;
        } else {
            hi = mid;
        }
        if done(lo, hi) {
            break;
        }
    }
    Ok(0.5 * (lo + hi))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn bisection_finds_the_square_root_of_two() {
        // First principles: x² = 2 on [1, 2] has the root √2.
        let r: Result<f64, ()> = bisect(1.0, 2.0, |x| Ok(x * x < 2.0), |lo, hi| hi - lo < 1e-15);
        assert_relative_eq!(r.unwrap(), 2f64.sqrt(), max_relative = 1e-15);
        // Never done: all 200 halvings, the bracket shrinks to adjacent floats around √2.
        let r: Result<f64, ()> = bisect(1.0, 2.0, |x| Ok(x * x < 2.0), |_, _| false);
        assert_relative_eq!(r.unwrap(), 2f64.sqrt(), max_relative = 1e-15);
    }

    #[test]
    fn bisection_passes_the_first_error_on() {
        let mut calls = 0;
        let r = bisect(
            0.0,
            1.0,
            |x| {
                calls += 1;
                if x < 0.3 {
                    Err(x)
                } else {
                    Ok(false)
                }
            },
            |_, _| false,
        );
        assert_eq!(r, Err(0.25));
        assert_eq!(calls, 2, "0.5, then 0.25");
    }
}
