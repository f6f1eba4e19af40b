//! The diagnosis along a run: UA configured or learned once, then any
//! window diagnosed on demand.

use crate::monitor::{FigureSettings, Integrals, Monitor, MonitorConfig};
use crate::num::Real;

use super::error::DiagnosisError;
use super::model::Window;
use super::ua::{Losses, Ua};
use super::verdict::{Diagnosis, Settings, diagnose, judge};

/// Anything that holds what the diagnosis needs besides the monitor's
/// settings, such as the validated rig configuration.
pub trait DiagnosisConfig: MonitorConfig {
    /// Coverage factor k.
    fn coverage_factor(&self) -> f64;
    /// `[losses]`, if configured.
    fn losses(&self) -> Option<Losses>;
}

/// Follows a run beside its [`Monitor`]: learns UA from the first steady
/// window with heat out measured it is shown (unless `[losses]`
/// configures it), and diagnoses the monitor's window when asked. A
/// controller shows it each Summary's window, so the host learns the same
/// UA from the same Summary; the replay of a file shows it every sample.
///
/// ```
/// use heatbound::config::RigConfig;
/// use heatbound::diagnosis::Tracker;
/// use heatbound::monitor::{Monitor, Sample};
/// let config = RigConfig::default();
/// let mut m: Monitor<64> = Monitor::new(&config).unwrap();
/// let mut tracker = Tracker::<f32>::new(&config);
/// for i in 0..20 {
///     // 30 % at 600 K / 300 K is within Carnot's 50 %.
///     let s = Sample { t_ms: i * 1000, t_hot_k: 600.0, t_cold_k: 300.0, heat_in_w: 1000.0,
///                      work_w: 300.0, heat_out_w: None, t_hot2_k: None };
///     m.push(&s);
///     assert!(!tracker.observe(&m, s.t_ms)); // heat out is not measured
/// }
/// let d = tracker.diagnose(&m, 19_000).unwrap();
/// assert!(d.consistent);
/// assert_eq!(d.suspect, None);
/// ```
#[derive(Clone, Debug)]
pub struct Tracker<R> {
    settings: Settings<R>,
    figures: FigureSettings,
    ua: Option<Ua<R>>,
}

impl<R: Real> Tracker<R> {
    /// A tracker for `config`.
    pub fn new(config: &impl DiagnosisConfig) -> Tracker<R> {
        Tracker {
            settings: Settings::new(
                &config.monitor_settings().uncertainty,
                config.coverage_factor(),
            ),
            figures: FigureSettings::new(config),
            ua: config.losses().as_ref().map(Ua::configured),
        }
    }

    /// The diagnosis settings.
    pub fn settings(&self) -> &Settings<R> {
        &self.settings
    }

    /// UA, configured or learned, once known.
    pub fn ua(&self) -> Option<&Ua<R>> {
        self.ua.as_ref()
    }

    /// Learns UA from the monitor's window ending at `t_ms`, if UA is not
    /// known yet and the rig is steady with heat out measured
    /// ([`Tracker::learn`]). True when UA was learned by this call.
    pub fn observe<const N: usize>(&mut self, monitor: &Monitor<N, R>, t_ms: u32) -> bool {
        if self.ua.is_some() || !monitor.is_steady() {
            return false;
        }
        self.learn(&monitor.window_integrals(), t_ms)
    }

    /// Learns UA from a window's `integrals` ending at `t_ms` (a steady
    /// one: the caller says so), if UA is not known yet and heat out was
    /// measured. True when UA was learned by this call. The host calls it
    /// with a steady Summary's integrals to follow a controller.
    pub fn learn(&mut self, integrals: &Integrals<R>, t_ms: u32) -> bool {
        if self.ua.is_some() || !integrals.heat_out_measured {
            return false;
        }
        let Some(w) = Window::from_integrals(integrals, &self.figures) else {
            return false;
        };
        self.ua = Ua::learn(&w, &self.settings.u, t_ms);
        self.ua.is_some()
    }

    /// The diagnosis of the monitor's window ending at `t_ms`. The first
    /// law is left out while the window still overlaps the one UA was
    /// learned from.
    pub fn diagnose<const N: usize>(
        &self,
        monitor: &Monitor<N, R>,
        t_ms: u32,
    ) -> Result<Diagnosis<R>, DiagnosisError> {
        let (w, overlaps) = self.window(monitor, t_ms)?;
        diagnose(&w, &self.settings, self.ua.as_ref(), overlaps)
    }

    /// The monitor's window ending at `t_ms`, and whether it still
    /// overlaps the one UA was learned from.
    fn window<const N: usize>(
        &self,
        monitor: &Monitor<N, R>,
        t_ms: u32,
    ) -> Result<(Window<R>, bool), DiagnosisError> {
        let w = Window::from_integrals(&monitor.window_integrals(), &self.figures)
            .ok_or(DiagnosisError::NoWindow)?;
        let overlaps = self
            .ua
            .as_ref()
            .is_some_and(|ua| overlaps_learning(ua.learned_at_ms, t_ms, w.duration_s));
        Ok((w, overlaps))
    }

    /// [`Tracker::diagnose`] without the test statistics ([`judge`]):
    /// what a controller sends.
    pub fn judge<const N: usize>(
        &self,
        monitor: &Monitor<N, R>,
        t_ms: u32,
    ) -> Result<Diagnosis<R>, DiagnosisError> {
        let (w, overlaps) = self.window(monitor, t_ms)?;
        judge(&w, &self.settings, self.ua.as_ref(), overlaps)
    }
}

/// Whether a window of `duration_s` ending at `t_ms` reaches back before
/// `learned_at_ms`, the end of the window UA was learned from (`None`: UA
/// was configured). Both ends of the link apply this same rule.
///
/// ```
/// use heatbound::diagnosis::overlaps_learning;
/// assert!(overlaps_learning(Some(60_000), 100_000, 60.0_f32));
/// assert!(!overlaps_learning(Some(60_000), 120_000, 60.0_f64));
/// assert!(!overlaps_learning(None, 100_000, 60.0_f32));
/// ```
pub fn overlaps_learning<R: Real>(learned_at_ms: Option<u32>, t_ms: u32, duration_s: R) -> bool {
    learned_at_ms.is_some_and(|at| R::from_ms(u64::from(t_ms.wrapping_sub(at))) < duration_s)
}
