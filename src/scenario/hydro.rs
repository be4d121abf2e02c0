//! The water side of a scenario: a flood hydrograph (flat base, rise at a constant rate, crest,
//! recession at a slower rate, base again) and the first-order lag through which a piezometer
//! answers the water that drives it. Pure arithmetic on hours.

/// A flood hydrograph, m and hours from the scenario start.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Hydrograph {
    /// Level before and after the flood.
    pub base_m: f64,
    /// Hour the rise begins.
    pub rise_from_h: f64,
    /// Rise rate, m/h (> 0).
    pub rise_m_per_h: f64,
    /// Crest level.
    pub crest_m: f64,
    /// Hours the crest is held.
    pub crest_h: f64,
    /// Recession rate, m/h (> 0).
    pub fall_m_per_h: f64,
}

impl Hydrograph {
    /// Hour the crest is reached.
    pub fn crest_from_h(&self) -> f64 {
        self.rise_from_h + (self.crest_m - self.base_m) / self.rise_m_per_h
    }

    /// Hour the recession begins.
    pub fn fall_from_h(&self) -> f64 {
        self.crest_from_h() + self.crest_h
    }

    /// Hour the level is back at its base.
    pub fn back_at_base_h(&self) -> f64 {
        self.fall_from_h() + (self.crest_m - self.base_m) / self.fall_m_per_h
    }

    /// The level at hour `t_h`.
    pub fn level(&self, t_h: f64) -> f64 {
        if t_h <= self.rise_from_h {
            self.base_m
        } else if t_h <= self.crest_from_h() {
            self.base_m + self.rise_m_per_h * (t_h - self.rise_from_h)
        } else if t_h <= self.fall_from_h() {
            self.crest_m
        } else {
            (self.crest_m - self.fall_m_per_h * (t_h - self.fall_from_h())).max(self.base_m)
        }
    }
}

/// First-order lag: the output moves towards the input by `1 − e^(−dt/τ)` each step, so a step
/// is followed with time constant τ and a ramp with a delay of τ. τ = 0 follows at once.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Lag {
    tau_h: f64,
    state: Option<f64>,
}

impl Lag {
    pub fn new(tau_h: f64) -> Lag {
        Lag {
            tau_h: tau_h.max(0.0),
            state: None,
        }
    }

    /// Advance by `dt_h` with input `x`; the first call starts at the input (steady state).
    pub fn step(&mut self, x: f64, dt_h: f64) -> f64 {
        let y = match self.state {
            None => x,
            Some(y) if self.tau_h == 0.0 => y + (x - y),
            Some(y) => y + (x - y) * (1.0 - (-dt_h / self.tau_h).exp()),
        };
        self.state = Some(y);
        y
    }
}
