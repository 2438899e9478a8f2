//! Test vectors shared by both testbenches, the summary and the logic check: directed
//! worst cases plus seeded random vectors, with expected outputs from native integer addition.

use serde::Serialize;

/// One input vector and its expected outputs.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Vector {
    pub a: u128,
    pub b: u128,
    pub cin: bool,
    pub s: u128,
    pub cout: bool,
}

pub fn mask(width: usize) -> u128 {
    if width >= 128 {
        u128::MAX
    } else {
        (1u128 << width) - 1
    }
}

impl Vector {
    /// Expected outputs by native integer addition (the reference for every check).
    pub fn new(a: u128, b: u128, cin: bool, width: usize) -> Vector {
        let m = mask(width);
        let (a, b) = (a & m, b & m);
        let (t, o1) = a.overflowing_add(b);
        let (t, o2) = t.overflowing_add(cin as u128);
        let (s, cout) = if width >= 128 {
            (t, o1 || o2)
        } else {
            (t & m, (t >> width) & 1 == 1)
        };
        Vector { a, b, cin, s, cout }
    }
}

/// What a vector is for, shown in the testbench comments and the summary.
#[derive(Debug, Clone, Serialize)]
pub struct Labeled {
    pub label: &'static str,
    #[serde(skip)]
    pub v: Vector,
}

/// Directed worst cases (common practice): all kill, all propagate with the carry-in
/// toggling (the longest carry path), a generate at bit 0 rippling to the top, all generate.
pub fn directed_labeled(width: usize) -> Vec<Labeled> {
    let m = mask(width);
    let alt = 0x5555_5555_5555_5555_5555_5555_5555_5555u128 & m;
    let v = |a, b, c| Vector::new(a, b, c, width);
    vec![
        Labeled {
            label: "all kill",
            v: v(0, 0, false),
        },
        Labeled {
            label: "all kill, carry in",
            v: v(0, 0, true),
        },
        Labeled {
            label: "all propagate",
            v: v(alt, !alt & m, false),
        },
        Labeled {
            label: "all propagate, carry in rises",
            v: v(alt, !alt & m, true),
        },
        Labeled {
            label: "all propagate, carry in falls",
            v: v(alt, !alt & m, false),
        },
        Labeled {
            label: "generate at bit 0 ripples to the top",
            v: v(1, m, false),
        },
        Labeled {
            label: "all generate",
            v: v(m, m, true),
        },
    ]
}

pub fn directed(width: usize) -> Vec<Vector> {
    directed_labeled(width).into_iter().map(|l| l.v).collect()
}

/// Index of the vector on which the deck measures the worst-case carry delay.
pub const WORST_CASE_RISE: usize = 3;
pub const WORST_CASE_FALL: usize = 4;

/// SplitMix64 (Steele, Lea & Flood, OOPSLA 2014): small, fast and fully specified, so the
/// same seed gives the same vectors on every machine and in every version.
pub struct Rng(u64);

impl Rng {
    pub fn new(seed: u64) -> Rng {
        Rng(seed)
    }
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    pub fn next_u128(&mut self) -> u128 {
        (self.next_u64() as u128) << 64 | self.next_u64() as u128
    }
}

pub fn random_vector(rng: &mut Rng, width: usize) -> Vector {
    let a = rng.next_u128();
    let b = rng.next_u128();
    let c = rng.next_u64() & 1 == 1;
    Vector::new(a, b, c, width)
}

/// Label of the random vectors (everything else in a plan is directed).
pub const RANDOM: &str = "random";
/// Labels of the timing engine's worst vector pair in a plan.
pub const WORST_BEFORE: &str = "worst path: before";
pub const WORST_AFTER: &str = "worst path: after (the measured transition)";

/// Directed vectors, then the timing engine's worst pair (static style: `before` and `after`;
/// dynamic style: `after` only, since every node is precharged before it evaluates), then `n`
/// random ones from `seed`.
pub fn plan(
    width: usize,
    n: usize,
    seed: u64,
    worst: Option<(Vector, Vector, bool)>,
) -> Vec<Labeled> {
    let mut out = directed_labeled(width);
    if let Some((before, after, dynamic)) = worst {
        if !dynamic {
            out.push(Labeled {
                label: WORST_BEFORE,
                v: before,
            });
        }
        out.push(Labeled {
            label: WORST_AFTER,
            v: after,
        });
    }
    let mut rng = Rng::new(seed);
    for _ in 0..n {
        out.push(Labeled {
            label: RANDOM,
            v: random_vector(&mut rng, width),
        });
    }
    out
}

/// How many vectors at the head of a plan are directed (the worst pair included).
pub fn n_directed(plan: &[Labeled]) -> usize {
    plan.iter().take_while(|l| l.label != RANDOM).count()
}

/// Index of the worst pair's measured vector in a plan, if it has one.
pub fn worst_index(plan: &[Labeled]) -> Option<usize> {
    plan.iter().position(|l| l.label == WORST_AFTER)
}
