//! Classing values for a choropleth map: quantiles, equal intervals, or
//! breaks the user gives. Classes are closed on the right: a value equal
//! to a break falls in the class below it (the first class also holds the
//! minimum), as `numpy.digitize(x, breaks, right=True)` assigns them.
//!
//! Quantile breaks are computed like `numpy.quantile`'s default ("linear",
//! type 7 of Hyndman and Fan, *Sample Quantiles in Statistical Packages*,
//! The American Statistician 50(4), 1996): the p-quantile of n sorted
//! values is x[h] interpolated at h = (n - 1) p. The tests compare against
//! values numpy computed (scripts/classify/numpy_breaks.py).

/// How classes are made.
#[derive(Debug, Clone, PartialEq)]
pub enum Classing {
    /// `k` classes holding about equally many values.
    Quantiles(usize),
    /// `k` classes of equal width between the minimum and the maximum.
    EqualIntervals(usize),
    /// Upper bounds of every class but the last, strictly increasing.
    Breaks(Vec<f64>),
}

/// Why values cannot be classed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ClassError {
    /// A class count below 2 (or above 12, more than a map can show).
    #[error("{0} classes: use 2 to 12")]
    Count(usize),
    /// User breaks not strictly increasing or not finite.
    #[error("the breaks must be finite numbers in increasing order")]
    Breaks,
}

/// Classes fitted to a set of values.
#[derive(Debug, Clone, PartialEq)]
pub struct Classes {
    /// Upper bounds of every class but the last (strictly increasing).
    pub breaks: Vec<f64>,
    /// Smallest value classed (`NaN` without values).
    pub min: f64,
    /// Largest value classed (`NaN` without values).
    pub max: f64,
    /// Values per class.
    pub counts: Vec<usize>,
    /// True when equal quantile breaks were merged (many equal values), so
    /// there are fewer classes than asked.
    pub merged: bool,
}

impl Classes {
    /// Number of classes.
    pub fn len(&self) -> usize {
        self.breaks.len() + 1
    }

    /// True when there are no classes (never: there is always one).
    pub fn is_empty(&self) -> bool {
        false
    }

    /// The class of a value: the first whose upper bound is at least the value.
    pub fn class_of(&self, value: f64) -> usize {
        self.breaks.partition_point(|&b| b < value)
    }

    /// Lower and upper bound of class `i` (the first starts at the minimum,
    /// the last ends at the maximum).
    pub fn bounds(&self, i: usize) -> (f64, f64) {
        let lo = if i == 0 { self.min } else { self.breaks[i - 1] };
        let hi = self.breaks.get(i).copied().unwrap_or(self.max);
        (lo, hi)
    }
}

/// The p-quantile (0..=1) of sorted values, as `numpy.quantile` computes it
/// by default; `NaN` without values.
pub fn quantile(sorted: &[f64], p: f64) -> f64 {
    match sorted.len() {
        0 => f64::NAN,
        1 => sorted[0],
        n => {
            let h = (n - 1) as f64 * p;
            let lo = h.floor() as usize;
            let hi = (lo + 1).min(n - 1);
            let t = h - lo as f64;
            sorted[lo] + t * (sorted[hi] - sorted[lo])
        }
    }
}

/// Fits classes to the finite values of `values` (others are ignored: a
/// missing value is never classed).
pub fn classify(values: &[f64], how: &Classing) -> Result<Classes, ClassError> {
    let mut v: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
    v.sort_by(f64::total_cmp);
    let (min, max) = match (v.first(), v.last()) {
        (Some(&a), Some(&b)) => (a, b),
        _ => (f64::NAN, f64::NAN),
    };
    let check = |k: usize| {
        if (2..=12).contains(&k) {
            Ok(k)
        } else {
            Err(ClassError::Count(k))
        }
    };
    let (mut breaks, merge) = match how {
        Classing::Quantiles(k) => {
            let k = check(*k)?;
            (
                (1..k)
                    .map(|i| quantile(&v, i as f64 / k as f64))
                    .collect::<Vec<_>>(),
                true,
            )
        }
        Classing::EqualIntervals(k) => {
            let k = check(*k)?;
            (
                (1..k)
                    .map(|i| min + (max - min) * i as f64 / k as f64)
                    .collect(),
                true,
            )
        }
        Classing::Breaks(b) => {
            check(b.len() + 1)?;
            if b.iter().any(|x| !x.is_finite()) || b.windows(2).any(|w| w[0] >= w[1]) {
                return Err(ClassError::Breaks);
            }
            (b.clone(), false)
        }
    };
    let before = breaks.len();
    if merge {
        breaks.retain(|b| b.is_finite());
        breaks.dedup();
    }
    let mut out = Classes {
        merged: breaks.len() < before,
        counts: vec![0; breaks.len() + 1],
        breaks,
        min,
        max,
    };
    for &x in &v {
        let c = out.class_of(x);
        out.counts[c] += 1;
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// numpy 2.4: `np.quantile([1, 2, 3, 4, 10], [0.25, 0.5, 0.75])` is
    /// `[2., 3., 4.]`; `np.quantile([1, 2, 3, 4], 0.5)` is 2.5.
    #[test]
    fn quantiles_interpolate_like_numpy() {
        assert_eq!(quantile(&[1.0, 2.0, 3.0, 4.0, 10.0], 0.25), 2.0);
        assert_eq!(quantile(&[1.0, 2.0, 3.0, 4.0], 0.5), 2.5);
        assert_eq!(quantile(&[7.0], 0.3), 7.0);
        assert!(quantile(&[], 0.5).is_nan());
    }

    /// Breaks and counts from numpy 2.4.6 on vega-datasets' county
    /// unemployment rates and on the squares 1..50
    /// (fixtures/classify/numpy-breaks.csv, made by
    /// scripts/classify/numpy_breaks.py).
    #[test]
    fn breaks_and_counts_agree_with_numpy() {
        let rates: Vec<f64> = include_str!("../../fixtures/apply/unemployment.tsv")
            .lines()
            .skip(1)
            .map(|l| l.split('\t').nth(1).unwrap().parse().unwrap())
            .collect();
        let squares: Vec<f64> = (1..=50).map(|i| (i * i) as f64).collect();
        let table = include_str!("../../fixtures/classify/numpy-breaks.csv");
        let mut checked = 0;
        for line in table.lines().skip(1) {
            let f: Vec<&str> = line.split(',').collect();
            let data = if f[0] == "unemployment" {
                &rates
            } else {
                &squares
            };
            let k: usize = f[2].parse().unwrap();
            let how = match f[1] {
                "quantiles" => Classing::Quantiles(k),
                _ => Classing::EqualIntervals(k),
            };
            let c = classify(data, &how).unwrap();
            let want: Vec<f64> = f[3].split(';').map(|b| b.parse().unwrap()).collect();
            let counts: Vec<usize> = f[4].split(';').map(|b| b.parse().unwrap()).collect();
            assert_eq!(c.breaks.len(), want.len(), "{line}");
            for (got, want) in c.breaks.iter().zip(&want) {
                assert!(
                    (got - want).abs() <= 1e-12 * want.abs().max(1.0),
                    "{line}: {got}"
                );
            }
            assert_eq!(c.counts, counts, "{line}");
            checked += 1;
        }
        assert_eq!(checked, 12);
    }

    #[test]
    fn a_value_on_a_break_falls_in_the_class_below() {
        let c = classify(&[0.0, 1.0, 2.0, 3.0], &Classing::Breaks(vec![1.0, 2.0])).unwrap();
        assert_eq!(c.class_of(0.0), 0);
        assert_eq!(c.class_of(1.0), 0);
        assert_eq!(c.class_of(1.5), 1);
        assert_eq!(c.class_of(2.0), 1);
        assert_eq!(c.class_of(3.0), 2);
        assert_eq!(c.counts, [2, 1, 1]);
        assert_eq!(c.bounds(0), (0.0, 1.0));
        assert_eq!(c.bounds(2), (2.0, 3.0));
    }

    #[test]
    fn missing_values_are_never_classed() {
        let c = classify(&[1.0, f64::NAN, 3.0], &Classing::EqualIntervals(2)).unwrap();
        assert_eq!(c.counts, [1, 1]);
        assert_eq!(c.breaks, [2.0]);
    }

    #[test]
    fn equal_quantile_breaks_merge_into_fewer_classes() {
        let c = classify(&[0.0; 10], &Classing::Quantiles(4)).unwrap();
        assert!(c.merged);
        assert_eq!(c.len(), 2);
        assert_eq!(c.counts.iter().sum::<usize>(), 10);
    }

    #[test]
    fn bad_breaks_and_counts_are_refused() {
        assert_eq!(
            classify(&[1.0], &Classing::Breaks(vec![2.0, 1.0])),
            Err(ClassError::Breaks)
        );
        assert_eq!(
            classify(&[1.0], &Classing::Quantiles(1)),
            Err(ClassError::Count(1))
        );
    }
}
