//! Prefix graphs against the published closed forms and bounds, checked on the graph itself
//! (independently of the netlist built from it).

use carrywright::arch::prefix::{family_ops, lookahead_ops, sparse_ops, Family, Graph, FAMILIES};

fn dense(f: Family, n: usize) -> Graph {
    let cols: Vec<usize> = (0..n).collect();
    let g = Graph::build(n, &family_ops(f, &cols)).unwrap_or_else(|e| panic!("{f:?} {n}: {e}"));
    g.check_complete()
        .unwrap_or_else(|e| panic!("{f:?} {n}: {e}"));
    g
}

/// Cells and levels for N = 2^L: Harris, "A Taxonomy of Parallel Prefix Networks", Asilomar
/// 2003, and the original papers (Kogge & Stone 1973; Sklansky 1960; Brent & Kung 1982;
/// Han & Carlson 1987; Ladner & Fischer 1980 in Harris's l = 1 form; Knowles 1999).
fn closed_form(f: Family, n: usize) -> (usize, usize) {
    let l = n.trailing_zeros() as usize;
    match f {
        Family::KoggeStone | Family::Knowles => (n * l - n + 1, l),
        Family::Sklansky => (n / 2 * l, l),
        Family::BrentKung => (2 * n - 2 - l, 2 * l - 2),
        Family::HanCarlson => (n / 2 * l, l + 1),
        Family::LadnerFischer => ((n - 1) + n / 4 * (l - 1), l + 1),
    }
}

/// A family's combines: (column, lower column, row).
type Ops = Vec<(usize, usize, usize)>;

#[test]
fn counts_equal_the_closed_forms() {
    for n in [8, 16, 32, 64] {
        for &f in FAMILIES {
            let s = dense(f, n).stats();
            let (cells, levels) = closed_form(f, n);
            assert_eq!(s.cells, cells, "{f:?} N={n}: cells");
            assert_eq!(s.levels, levels, "{f:?} N={n}: levels");
            // Every network has exactly N - 1 grey cells (REFERENCES, counting convention).
            assert_eq!(s.grey, n - 1, "{f:?} N={n}: grey");
            assert_eq!(s.black, cells - (n - 1));
        }
    }
}

#[test]
fn worked_counts() {
    // Worked values derived from the closed forms (Harris 2003).
    let table: &[(Family, [usize; 4])] = &[
        (Family::KoggeStone, [17, 49, 129, 321]),
        (Family::Sklansky, [12, 32, 80, 192]),
        (Family::BrentKung, [11, 26, 57, 120]),
        (Family::HanCarlson, [12, 32, 80, 192]),
    ];
    for (f, cells) in table {
        for (n, &c) in [8, 16, 32, 64].iter().zip(cells) {
            assert_eq!(dense(*f, *n).stats().cells, c, "{f:?} N={n}");
        }
    }
}

#[test]
fn lateral_fanout_as_harris_counts_it() {
    // Harris 2003: fan-out 2^f + 1; Kogge-Stone and Han-Carlson 2, Sklansky N/2 + 1,
    // Ladner-Fischer (l = 1) N/4 + 1, Knowles [2,1,...,1] 3.
    for n in [8, 16, 32, 64] {
        assert_eq!(dense(Family::KoggeStone, n).stats().max_fanout, 2);
        assert_eq!(dense(Family::HanCarlson, n).stats().max_fanout, 2);
        assert_eq!(dense(Family::Sklansky, n).stats().max_fanout, n / 2 + 1);
        assert_eq!(
            dense(Family::LadnerFischer, n).stats().max_fanout,
            n / 4 + 1
        );
        assert_eq!(dense(Family::Knowles, n).stats().max_fanout, 3);
    }
}

/// Snir (J. Algorithms 7, 1986): cells + levels >= 2N - 2 for every prefix graph; and every
/// group (i:0) is computed exactly once as its column's final output. Every width 2..=128,
/// dense and sparse forms and block lookahead.
#[test]
fn snir_bound_and_exactly_once_at_every_width() {
    let mut graphs = 0;
    for n in 2..=128usize {
        let mut all: Vec<(String, Ops)> = vec![];
        for &f in FAMILIES {
            for k in [1, 2, 3, 4, 8] {
                if k <= n {
                    all.push((format!("{f:?} block {k}"), sparse_ops(f, n, k)));
                }
            }
        }
        for k in [2, 4, 5, 8] {
            if k <= n {
                all.push((format!("lookahead {k}"), lookahead_ops(n, k).0));
            }
        }
        for (what, ops) in all {
            let g = Graph::build(n, &ops).unwrap_or_else(|e| panic!("{what} N={n}: {e}"));
            g.check_complete()
                .unwrap_or_else(|e| panic!("{what} N={n}: {e}"));
            let s = g.stats();
            assert!(
                s.cells + s.levels >= 2 * n - 2,
                "{what} N={n}: {} cells + {} levels",
                s.cells,
                s.levels
            );
            assert_eq!(s.grey, n - 1, "{what} N={n}");
            graphs += 1;
        }
    }
    assert!(graphs > 4000);
}

/// A serial (ripple) prefix meets Snir's bound with equality (Snir 1986), and a graph with a
/// gap is refused: the checks above can fail.
#[test]
fn serial_prefix_meets_the_bound_and_gaps_are_refused() {
    for n in 2..=64usize {
        let ops: Vec<(usize, usize, usize)> = (1..n).map(|i| (i, i - 1, i)).collect();
        let s = Graph::build(n, &ops).unwrap().stats();
        assert_eq!(s.cells + s.levels, 2 * n - 2);
    }
    let mut g = Graph::new(4);
    assert!(
        g.combine(3, 1, 1).is_err(),
        "(3:3) with (1:1) leaves bit 2 out"
    );
    let g = Graph::build(4, &[(1, 0, 1), (3, 2, 1)]).unwrap();
    assert!(g.check_complete().is_err());
}
