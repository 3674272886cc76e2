//! Expectations computed without tunnelcast: the Weibull survival function under each
//! adjustment in closed form, Gauss–Legendre quadrature written here for the two integrals that
//! have none (a waning hazard ratio on a Weibull, the background share of a cycle's exits), and
//! the tunnel-table, matrix and truncation definitions of the command-line contract applied to
//! those survival values. Nothing here calls the library.
#![allow(dead_code)]

/// Months per year: "a month is a twelfth of a year" (interface.md, Time).
pub const MONTHS_PER_YEAR: f64 = 12.0;

/// A Weibull curve, S(t) = exp(-(t/scale)^shape), time in months (interface.md, families).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Weibull {
    pub shape: f64,
    pub scale: f64,
}

impl Weibull {
    /// H(t) = (t/scale)^shape.
    pub fn cumulative_hazard(&self, t: f64) -> f64 {
        (t / self.scale).powf(self.shape)
    }

    /// h(t) = shape/scale · (t/scale)^(shape - 1).
    pub fn hazard(&self, t: f64) -> f64 {
        self.shape / self.scale * (t / self.scale).powf(self.shape - 1.0)
    }
}

/// An adjustment as the command line states it; times in months.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Adjust {
    None,
    /// `--hazard-ratio X`.
    HazardRatio(f64),
    /// `--acceleration-factor X`.
    Acceleration(f64),
    /// `--hazard-ratio X --waning START..END`.
    Waning {
        ratio: f64,
        start: f64,
        end: f64,
    },
    /// `--background-mode add` with a life table whose qx is the same at every age.
    Add {
        qx: f64,
    },
    /// `--background-mode floor` with a life table whose qx is the same at every age.
    Floor {
        qx: f64,
    },
}

/// The background hazard per month of a constant annual qx: -ln(1 - qx) per year, constant
/// within each year of age (interface.md, Background life table).
pub fn background_hazard(qx: f64) -> f64 {
    -(1.0 - qx).ln() / MONTHS_PER_YEAR
}

/// Where a Weibull hazard with shape > 1 (increasing) reaches `level`:
/// t* = scale · (level·scale/shape)^(1/(shape - 1)), solving h(t*) = level.
pub fn crossing(w: Weibull, level: f64) -> f64 {
    assert!(
        w.shape > 1.0,
        "the floor closed form here needs an increasing hazard"
    );
    w.scale * (level * w.scale / w.shape).powf(1.0 / (w.shape - 1.0))
}

/// Cumulative hazard at `t` (months) of the Weibull `w` under `adjust`.
pub fn cumulative_hazard(w: Weibull, adjust: Adjust, t: f64) -> f64 {
    match adjust {
        Adjust::None => w.cumulative_hazard(t),
        // Proportional hazards on a Weibull give the Weibull with scale·X^(-1/shape): X·(t/σ)^k =
        // (t/(σX^(-1/k)))^k (closed form, common practice).
        Adjust::HazardRatio(x) => Weibull {
            scale: w.scale * x.powf(-1.0 / w.shape),
            ..w
        }
        .cumulative_hazard(t),
        // An acceleration factor X, S(t/X), on a Weibull gives the Weibull with scale·X
        // (closed form, common practice).
        Adjust::Acceleration(x) => Weibull {
            scale: w.scale * x,
            ..w
        }
        .cumulative_hazard(t),
        // h(u) = h0(u)·X^v(u), v = 1 before START, (END - u)/(END - START) in the window, 0 after
        // (interface.md / README: the log hazard ratio moves linearly to 0); the window's
        // integral by Gauss–Legendre.
        Adjust::Waning { ratio, start, end } => {
            let before = ratio * w.cumulative_hazard(t.min(start));
            // Smooth on the window (START > 0 or a hazard bounded there): 8 panels.
            let window = if t > start {
                integrate_panels(
                    |u| w.hazard(u) * ratio.powf((end - u) / (end - start)),
                    start,
                    t.min(end),
                    8,
                )
            } else {
                0.0
            };
            let after = if t > end {
                w.cumulative_hazard(t) - w.cumulative_hazard(end)
            } else {
                0.0
            };
            before + window + after
        }
        // Competing causes: hazards add (interface.md, `add`).
        Adjust::Add { qx } => w.cumulative_hazard(t) + background_hazard(qx) * t,
        // max(h0, h_b) with an increasing h0: h_b up to the crossing t*, h0 after it
        // (interface.md, `floor`).
        Adjust::Floor { qx } => {
            let level = background_hazard(qx);
            let at = crossing(w, level);
            level * t.min(at) + (w.cumulative_hazard(t) - w.cumulative_hazard(at)).max(0.0)
        }
    }
}

/// S(t).
pub fn survival(w: Weibull, adjust: Adjust, t: f64) -> f64 {
    (-cumulative_hazard(w, adjust, t)).exp()
}

/// Exit probability over [a, b): 1 - S(b)/S(a) (interface.md, tunnels).
pub fn p_exit(w: Weibull, adjust: Adjust, a: f64, b: f64) -> f64 {
    -(-(cumulative_hazard(w, adjust, b) - cumulative_hazard(w, adjust, a))).exp_m1()
}

/// One row of the long layout as the contract defines it, plus the extra columns an
/// adjustment adds, by name.
#[derive(Debug, Clone, PartialEq)]
pub struct Row {
    pub tunnel: usize,
    pub t_start: f64,
    pub t_end: f64,
    pub surv_start: f64,
    pub surv_end: f64,
    pub p_exit: f64,
    pub p_next: f64,
    pub extra: Vec<(&'static str, f64)>,
}

/// The long layout of `count` tunnels of `cycle` months (interface.md: tunnel k covers
/// [(k-1)·cycle, k·cycle); p_exit = 1 - S(t_end)/S(t_start); p_next = 1 - p_exit).
/// Extra columns: with `add`, p_exit_disease and p_exit_background (the background share
/// h_b ∫ S(u)/S(t_start) du over the cycle, by Gauss–Legendre; the disease share the rest);
/// with `floor`, floor_share (the share of the cycle before the crossing, where h_b is larger).
pub fn long_table(w: Weibull, adjust: Adjust, cycle: f64, count: usize) -> Vec<Row> {
    (1..=count)
        .map(|k| {
            let (a, b) = ((k - 1) as f64 * cycle, k as f64 * cycle);
            let p = p_exit(w, adjust, a, b);
            let extra = match adjust {
                Adjust::Add { qx } => {
                    let h_b = background_hazard(qx);
                    let h_a = cumulative_hazard(w, adjust, a);
                    let background =
                        h_b * integrate(|u| (h_a - cumulative_hazard(w, adjust, u)).exp(), a, b);
                    vec![
                        ("p_exit_disease", p - background),
                        ("p_exit_background", background),
                    ]
                }
                Adjust::Floor { qx } => {
                    let at = crossing(w, background_hazard(qx));
                    vec![("floor_share", (at.min(b) - a).clamp(0.0, b - a) / (b - a))]
                }
                _ => Vec::new(),
            };
            Row {
                tunnel: k,
                t_start: a,
                t_end: b,
                surv_start: survival(w, adjust, a),
                surv_end: survival(w, adjust, b),
                p_exit: p,
                p_next: 1.0 - p,
                extra,
            }
        })
        .collect()
}

/// The column names of the long layout under `adjust` (interface order, then the extras).
pub fn long_columns(adjust: Adjust) -> Vec<&'static str> {
    let mut names = vec![
        "tunnel",
        "t_start",
        "t_end",
        "surv_start",
        "surv_end",
        "p_exit",
        "p_next",
    ];
    names.extend(match adjust {
        Adjust::Add { .. } => vec!["p_exit_disease", "p_exit_background"],
        Adjust::Floor { .. } => vec!["floor_share"],
        _ => vec![],
    });
    names
}

impl Row {
    /// The row's values in [`long_columns`] order.
    pub fn values(&self) -> Vec<f64> {
        let mut v = vec![
            self.tunnel as f64,
            self.t_start,
            self.t_end,
            self.surv_start,
            self.surv_end,
            self.p_exit,
            self.p_next,
        ];
        v.extend(self.extra.iter().map(|(_, x)| *x));
        v
    }
}

/// The transition matrix over tunnel_1 … tunnel_N and exit (interface.md, matrix layout):
/// tunnel k → k+1 with p_next, → exit with p_exit; the last tunnel stays with its p_next;
/// exit is absorbing.
pub fn matrix(rows: &[Row]) -> Vec<Vec<f64>> {
    let n = rows.len();
    let mut m = vec![vec![0.0; n + 1]; n + 1];
    for (k, r) in rows.iter().enumerate() {
        m[k][(k + 1).min(n - 1)] += r.p_next;
        m[k][n] = r.p_exit;
    }
    m[n][n] = 1.0;
    m
}

/// One row of the truncation table (interface.md, horizon): the chain cut at K tunnels
/// follows S to t_K and then repeats p_K, S_K(t_j) = S(t_K)(1 - p_K)^(j-K).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Truncation {
    pub count: usize,
    pub max_surv_gap: f64,
    pub ly_rel_error: f64,
    pub p_exit_last: f64,
}

/// The truncation table for K = 1..n from survival at the boundaries t_j = j·cycle, j = 0..n:
/// max_surv_gap = max_j |S_K(t_j) - S(t_j)|; ly_rel_error = |LY_K - LY|/LY with life-years by
/// the trapezoid rule over the boundaries (unit-free).
pub fn truncation(w: Weibull, adjust: Adjust, cycle: f64, n: usize) -> Vec<Truncation> {
    let s: Vec<f64> = (0..=n)
        .map(|j| survival(w, adjust, j as f64 * cycle))
        .collect();
    let trapezoid = |f: &[f64]| f.windows(2).map(|p| 0.5 * (p[0] + p[1])).sum::<f64>();
    let ly = trapezoid(&s);
    (1..=n)
        .map(|k| {
            let p = p_exit(w, adjust, (k - 1) as f64 * cycle, k as f64 * cycle);
            let chain: Vec<f64> = (0..=n)
                .map(|j| {
                    if j <= k {
                        s[j]
                    } else {
                        s[k] * (1.0 - p).powi((j - k) as i32)
                    }
                })
                .collect();
            let gap = chain
                .iter()
                .zip(&s)
                .map(|(a, b)| (a - b).abs())
                .fold(0.0, f64::max);
            Truncation {
                count: k,
                max_surv_gap: gap,
                ly_rel_error: (trapezoid(&chain) - ly).abs() / ly,
                p_exit_last: p,
            }
        })
        .collect()
}

/// The within-cycle methods of the command-line contract (interface.md, horizon; the formulas
/// in docs/tunnels.md), in table order.
pub const METHODS: [&str; 5] = ["start", "end", "half-cycle", "trapezoid", "simpson"];

/// ∫ over n intervals of width `h` from the n + 1 values `f` by `method` (docs/tunnels.md):
/// start h·Σ_{j<n} f_j; end h·Σ_{j≥1} f_j; half-cycle h·(Σ_{j≥1} f_j + f_0/2 - f_n/2);
/// trapezoid h·Σ (f_{j-1} + f_j)/2; simpson composite 1/3 rule (weights 1, 4, 2, …, 4, 1
/// times h/3), its last three intervals by the 3/8 rule (1, 3, 3, 1 times 3h/8) when n is odd,
/// and the trapezoid for n = 1 (Burden and Faires, Numerical Analysis, composite rules; from
/// memory).
pub fn boundary_sum(method: &str, f: &[f64], h: f64) -> f64 {
    let n = f.len() - 1;
    match method {
        "start" => h * f[..n].iter().sum::<f64>(),
        "end" => h * f[1..].iter().sum::<f64>(),
        "half-cycle" => h * (f[1..].iter().sum::<f64>() + 0.5 * f[0] - 0.5 * f[n]),
        "trapezoid" => h * (1..=n).map(|j| 0.5 * (f[j - 1] + f[j])).sum::<f64>(),
        "simpson" if n == 1 => 0.5 * h * (f[0] + f[1]),
        "simpson" => {
            let third = if n % 2 == 0 { n } else { n - 3 };
            let mut weights = vec![0.0; n + 1];
            for (j, w) in weights.iter_mut().enumerate().take(third + 1) {
                *w = if j == 0 || j == third {
                    h / 3.0
                } else if j % 2 == 1 {
                    4.0 * h / 3.0
                } else {
                    2.0 * h / 3.0
                };
            }
            if third < n {
                for (i, w) in [1.0, 3.0, 3.0, 1.0].iter().enumerate() {
                    weights[third + i] += w * 3.0 * h / 8.0;
                }
            }
            weights.iter().zip(f).map(|(w, v)| w * v).sum()
        }
        other => panic!("no method {other}"),
    }
}

/// One method's life-years, in years, from the boundary survival (interface.md, horizon).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WithinCycle {
    pub method: &'static str,
    /// The method on S(t_j), j = 0..n.
    pub life_years: f64,
    /// The method on S(t_j)·(1 + r)^(-t_j), t_j in years (docs/tunnels.md, discounting).
    pub discounted_life_years: f64,
}

/// Every method over `n` cycles of `cycle` months, discounted at `discount` a year, from the
/// closed-form survival at the boundaries; life-years in years (a month is a twelfth of one).
pub fn within_cycle(
    w: Weibull,
    adjust: Adjust,
    cycle: f64,
    n: usize,
    discount: f64,
) -> Vec<WithinCycle> {
    let t: Vec<f64> = (0..=n).map(|j| j as f64 * cycle).collect();
    let s: Vec<f64> = t.iter().map(|t| survival(w, adjust, *t)).collect();
    let g: Vec<f64> = s
        .iter()
        .zip(&t)
        .map(|(s, t)| s * (1.0 + discount).powf(-t / MONTHS_PER_YEAR))
        .collect();
    let h = cycle / MONTHS_PER_YEAR;
    METHODS
        .iter()
        .map(|&method| WithinCycle {
            method,
            life_years: boundary_sum(method, &s, h),
            discounted_life_years: boundary_sum(method, &g, h),
        })
        .collect()
}

/// Times (months) where the adjusted hazard has a kink: the waning window's ends, the floor's
/// crossing.
fn kinks(w: Weibull, adjust: Adjust) -> Vec<f64> {
    match adjust {
        Adjust::Waning { start, end, .. } => vec![start, end],
        Adjust::Floor { qx } => vec![crossing(w, background_hazard(qx))],
        _ => Vec::new(),
    }
}

/// The restricted mean to `end` months, ∫₀^end S(t)·(1 + r)^(-t/12) dt, in years (r = 0: not
/// discounted): Gauss–Legendre on each month, split at the hazard's kinks.
pub fn restricted_mean(w: Weibull, adjust: Adjust, end: f64, discount: f64) -> f64 {
    let kinks = kinks(w, adjust);
    let f = |t: f64| survival(w, adjust, t) * (1.0 + discount).powf(-t / MONTHS_PER_YEAR);
    let mut total = 0.0;
    let mut a = 0.0;
    while a < end {
        let b = (a + 1.0).min(end);
        let mut points = vec![a];
        points.extend(kinks.iter().copied().filter(|k| *k > a && *k < b));
        points.push(b);
        total += points
            .windows(2)
            .map(|p| integrate_panels(f, p[0], p[1], 2))
            .sum::<f64>();
        a = b;
    }
    total / MONTHS_PER_YEAR
}

/// Background mortality from a life table for a cohort entering at `start_age` (years), time
/// in months: the hazard is constant within each year of age at -ln(1 - qx) per year
/// (interface.md, Background life table), so the cumulative hazard is a sum over the years of
/// age crossed.
#[derive(Debug, Clone, PartialEq)]
pub struct LifeTableBackground {
    /// Age of the first row.
    pub first_age: f64,
    /// qx of each age from `first_age` on, one year apart.
    pub qx: Vec<f64>,
    /// Age at entry, in years.
    pub start_age: f64,
}

impl LifeTableBackground {
    /// From the text of a life table CSV (`age` and `column`), leading `#` lines skipped.
    pub fn from_csv(text: &str, column: &str, start_age: f64) -> LifeTableBackground {
        let body: String = text
            .lines()
            .skip_while(|l| l.starts_with('#'))
            .map(|l| format!("{l}\n"))
            .collect();
        let mut reader = csv::Reader::from_reader(body.as_bytes());
        let headers = reader.headers().unwrap().clone();
        let at = |name: &str| headers.iter().position(|h| h == name).unwrap();
        let (age, q) = (at("age"), at(column));
        let rows: Vec<(f64, f64)> = reader
            .records()
            .map(|r| {
                let r = r.unwrap();
                (r[age].parse().unwrap(), r[q].parse().unwrap())
            })
            .collect();
        for (i, (a, _)) in rows.iter().enumerate() {
            assert_eq!(*a, rows[0].0 + i as f64, "ages one year apart");
        }
        LifeTableBackground {
            first_age: rows[0].0,
            qx: rows.iter().map(|r| r.1).collect(),
            start_age,
        }
    }

    /// Hazard per month at time `t` (months since entry).
    pub fn hazard(&self, t: f64) -> f64 {
        let age = self.start_age + t / MONTHS_PER_YEAR;
        let q = self.qx[(age.floor() - self.first_age) as usize];
        -(1.0 - q).ln() / MONTHS_PER_YEAR
    }

    /// Times (months) in (a, b) at which a new year of age starts.
    pub fn birthdays(&self, a: f64, b: f64) -> Vec<f64> {
        let first = (self.start_age + a / MONTHS_PER_YEAR).floor() + 1.0;
        (0..)
            .map(|i| (first + i as f64 - self.start_age) * MONTHS_PER_YEAR)
            .take_while(|t| *t < b)
            .filter(|t| *t > a)
            .collect()
    }

    /// [a, b] cut at the birthdays inside it.
    pub fn pieces(&self, a: f64, b: f64) -> Vec<(f64, f64)> {
        let mut points = vec![a];
        points.extend(self.birthdays(a, b));
        points.push(b);
        points.windows(2).map(|p| (p[0], p[1])).collect()
    }

    /// Cumulative background hazard from entry to `t` (months).
    pub fn cumulative(&self, t: f64) -> f64 {
        self.pieces(0.0, t)
            .iter()
            .map(|(a, b)| self.hazard(0.5 * (a + b)) * (b - a))
            .sum()
    }
}

/// A cycle [a, b) of a Weibull under a treatment `effect` with the life-table background added
/// as a competing cause (interface.md, `add`): (p_exit, p_exit_background), the background share
/// being Σ over the years of age h_b ∫ S(u)/S(a) du (Gauss–Legendre on each piece).
pub fn added_life_table(
    w: Weibull,
    effect: Adjust,
    table: &LifeTableBackground,
    a: f64,
    b: f64,
) -> (f64, f64) {
    let h = |t: f64| cumulative_hazard(w, effect, t) + table.cumulative(t);
    let (h_a, h_b) = (h(a), h(b));
    let p = -(-(h_b - h_a)).exp_m1();
    let background = table
        .pieces(a, b)
        .iter()
        .map(|&(from, to)| {
            table.hazard(0.5 * (from + to)) * integrate_panels(|u| (h_a - h(u)).exp(), from, to, 16)
        })
        .sum();
    (p, background)
}

/// Whether `got` equals `want` within `rel` relative (and 1e-13 absolute, for values near 0).
pub fn close(got: f64, want: f64, rel: f64) -> bool {
    (got - want).abs() <= 1e-13 + rel * want.abs() || (got.is_nan() && want.is_nan())
}

/// Nodes and weights of the n-point Gauss–Legendre rule on [-1, 1]: the roots of P_n by
/// Newton's method from cos(π(i + 3/4)/(n + 1/2)), weights 2/((1 - x²)P_n'(x)²) (Press et al.,
/// Numerical Recipes, 3rd ed., 2007, section 4.6, routine gauleg — from memory).
pub fn gauss_legendre(n: usize) -> (Vec<f64>, Vec<f64>) {
    let mut x = vec![0.0; n];
    let mut w = vec![0.0; n];
    for i in 0..n.div_ceil(2) {
        let mut z = (std::f64::consts::PI * (i as f64 + 0.75) / (n as f64 + 0.5)).cos();
        let mut derivative;
        loop {
            let (mut p1, mut p2) = (1.0, 0.0);
            for j in 0..n {
                let p3 = p2;
                p2 = p1;
                p1 = ((2 * j + 1) as f64 * z * p2 - j as f64 * p3) / (j + 1) as f64;
            }
            derivative = n as f64 * (z * p1 - p2) / (z * z - 1.0);
            let previous = z;
            z = previous - p1 / derivative;
            if (z - previous).abs() < 1e-15 {
                break;
            }
        }
        x[i] = -z;
        x[n - 1 - i] = z;
        w[i] = 2.0 / ((1.0 - z * z) * derivative * derivative);
        w[n - 1 - i] = w[i];
    }
    (x, w)
}

/// ∫_a^b f by the 20-point Gauss–Legendre rule on 64 equal panels after the substitution
/// u = a + (b - a)s², which makes integrands behaving like (u - a)^p at the left end (a Weibull
/// hazard or survival near 0) smooth in s.
pub fn integrate(f: impl Fn(f64) -> f64, a: f64, b: f64) -> f64 {
    integrate_panels(f, a, b, 64)
}

/// [`integrate`] on `panels` panels (fewer for integrands smooth on the whole interval).
pub fn integrate_panels(f: impl Fn(f64) -> f64, a: f64, b: f64, panels: usize) -> f64 {
    if b <= a {
        return 0.0;
    }
    let (x, w) = gauss_legendre(20);
    let h = 1.0 / panels as f64;
    let g = |s: f64| f(a + (b - a) * s * s) * 2.0 * (b - a) * s;
    (0..panels)
        .map(|p| {
            let mid = (p as f64 + 0.5) * h;
            x.iter()
                .zip(&w)
                .map(|(xi, wi)| wi * g(mid + 0.5 * h * xi))
                .sum::<f64>()
                * 0.5
                * h
        })
        .sum()
}

/// Nodes and weights of the n-point Gauss–Hermite rule, ∫ e^(-x²) f(x) dx ≈ Σ w_i f(x_i): the
/// roots of the orthonormal Hermite polynomials by Newton's method from the usual asymptotic
/// starting values (Press et al., Numerical Recipes, 3rd ed., 2007, section 4.6, routine gauher
/// — from memory).
pub fn gauss_hermite(n: usize) -> (Vec<f64>, Vec<f64>) {
    let pim4 = std::f64::consts::PI.powf(-0.25);
    let mut x = vec![0.0; n];
    let mut w = vec![0.0; n];
    let nf = n as f64;
    let mut z: f64 = 0.0;
    for i in 0..n.div_ceil(2) {
        z = match i {
            0 => (2.0 * nf + 1.0).sqrt() - 1.85575 * (2.0 * nf + 1.0).powf(-0.16667),
            1 => z - 1.14 * nf.powf(0.426) / z,
            2 => 1.86 * z - 0.86 * x[0],
            3 => 1.91 * z - 0.91 * x[1],
            _ => 2.0 * z - x[i - 2],
        };
        let mut derivative = 0.0;
        for _ in 0..100 {
            let (mut p1, mut p2) = (pim4, 0.0);
            for j in 0..n {
                let p3 = p2;
                p2 = p1;
                let jf = j as f64;
                p1 = z * (2.0 / (jf + 1.0)).sqrt() * p2 - (jf / (jf + 1.0)).sqrt() * p3;
            }
            derivative = (2.0 * nf).sqrt() * p2;
            let previous = z;
            z = previous - p1 / derivative;
            if (z - previous).abs() <= 1e-14 {
                break;
            }
        }
        x[i] = z;
        x[n - 1 - i] = -z;
        w[i] = 2.0 / (derivative * derivative);
        w[n - 1 - i] = w[i];
    }
    (x, w)
}

/// E f(θ) for θ bivariate normal with `mean` and covariance `cov`: θ = mean + L·√2·(x_i, x_j)
/// with L the Cholesky factor of `cov`, weighted by the 40-point Gauss–Hermite weights / π.
pub fn normal_expectation(mean: [f64; 2], cov: [[f64; 2]; 2], f: impl Fn([f64; 2]) -> f64) -> f64 {
    let l11 = cov[0][0].sqrt();
    let l21 = cov[1][0] / l11;
    let l22 = (cov[1][1] - l21 * l21).sqrt();
    let (x, w) = gauss_hermite(40);
    let root2 = std::f64::consts::SQRT_2;
    let mut total = 0.0;
    for (xi, wi) in x.iter().zip(&w) {
        for (xj, wj) in x.iter().zip(&w) {
            let (z1, z2) = (root2 * xi, root2 * xj);
            let theta = [mean[0] + l11 * z1, mean[1] + l21 * z1 + l22 * z2];
            total += wi * wj * f(theta);
        }
    }
    total / std::f64::consts::PI
}

#[test]
fn quadrature_integrates_known_integrals() {
    // ∫_0^1 x^9 dx = 1/10, ∫_0^π sin = 2, ∫_0^1 √x = 2/3, ∫_0^1 x^0.3 = 1/1.3, ∫_2^5 e^-x =
    // e^-2 - e^-5 (calculus).
    assert!((integrate(|x| x.powi(9), 0.0, 1.0) - 0.1).abs() < 1e-15);
    assert!((integrate(f64::sin, 0.0, std::f64::consts::PI) - 2.0).abs() < 1e-14);
    assert!((integrate(f64::sqrt, 0.0, 1.0) - 2.0 / 3.0).abs() < 1e-15);
    assert!((integrate(|x| x.powf(0.3), 0.0, 1.0) - 1.0 / 1.3).abs() < 1e-12);
    let e = |x: f64| (-x).exp();
    assert!((integrate(e, 2.0, 5.0) - (e(2.0) - e(5.0))).abs() < 1e-15);
    // ∫ e^(-x²) x^(2m) dx = Γ(m + 1/2): √π, √π/2, 3√π/4 (calculus); and for a normal θ,
    // E θ₁θ₂ = μ₁μ₂ + Σ₁₂ (definition of the covariance).
    let (x, w) = gauss_hermite(40);
    let pi = std::f64::consts::PI;
    for (m, want) in [(0, pi.sqrt()), (1, pi.sqrt() / 2.0), (2, 0.75 * pi.sqrt())] {
        let got: f64 = x.iter().zip(&w).map(|(x, w)| w * x.powi(2 * m)).sum();
        assert!((got - want).abs() < 1e-13, "moment {m}: {got}");
    }
    let cov = [[0.04, -0.01], [-0.01, 0.09]];
    let e12 = normal_expectation([0.3, 2.0], cov, |t| t[0] * t[1]);
    assert!((e12 - (0.6 - 0.01)).abs() < 1e-13, "{e12}");
}
