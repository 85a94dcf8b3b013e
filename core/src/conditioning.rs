//! Stream conditioning before framing: optional DC removal, then optional
//! pre-emphasis, both on the continuous stream from zero initial state.
//!
//! * DC removal: `y[n] = x[n] - x[n-1] + p·y[n-1]`.
//! * Pre-emphasis: `z[n] = y[n] - a·y[n-1]`.
//!
//! ```
//! use stapes_core::conditioning::FloatConditioner;
//! let mut c = FloatConditioner::new(None, Some(0.5));
//! assert_eq!(c.step(1.0), 1.0);
//! assert_eq!(c.step(1.0), 0.5);
//! ```

/// `f32` stream conditioner.
#[derive(Clone, Copy, Debug, Default)]
pub struct FloatConditioner {
    dc_pole: Option<f32>,
    pre_emphasis: Option<f32>,
    dc_last_in: f32,
    dc_last_out: f32,
    pre_last_in: f32,
}

impl FloatConditioner {
    /// A conditioner with zero state.
    pub fn new(dc_pole: Option<f32>, pre_emphasis: Option<f32>) -> Self {
        FloatConditioner {
            dc_pole,
            pre_emphasis,
            ..Default::default()
        }
    }

    /// Returns to zero state.
    pub fn reset(&mut self) {
        *self = Self::new(self.dc_pole, self.pre_emphasis);
    }

    /// Conditions `values` in place, in stream order: the same results as
    /// [`FloatConditioner::step`] on each, with the choice of filters made
    /// once per block (and nothing done when both are off).
    #[inline]
    pub fn run_in_place(&mut self, values: &mut [f32]) {
        match (self.dc_pole, self.pre_emphasis) {
            (None, None) => {}
            (Some(_), None) | (None, Some(_)) | (Some(_), Some(_)) => {
                for v in values.iter_mut() {
                    *v = self.step(*v);
                }
            }
        }
    }

    /// Conditions one sample.
    #[inline]
    pub fn step(&mut self, x: f32) -> f32 {
        let y = match self.dc_pole {
            Some(p) => {
                let y = x - self.dc_last_in + p * self.dc_last_out;
                self.dc_last_in = x;
                self.dc_last_out = y;
                y
            }
            None => x,
        };
        match self.pre_emphasis {
            Some(a) => {
                let z = y - a * self.pre_last_in;
                self.pre_last_in = y;
                z
            }
            None => y,
        }
    }
}
