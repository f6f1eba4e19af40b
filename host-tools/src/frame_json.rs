//! Frames as JSON, one object per frame, for general tools: `watch --json`
//! writes them one per line (newline-delimited JSON).
//!
//! ```text
//! Frame + host receive time --> frame_json --> {"kind": "summary", "host_ms": ..., ...}
//! ```
//!
//! Field names follow the wire format's (`docs/wire-format.md`), with units
//! in the names; a figure that is not available is `null`. Every object
//! has `kind` (`hello`, `summary`, `event`, `reply`) and `host_ms` (host
//! receive time, Unix ms).
use heatbound::alarm::RuleId;
use heatbound::monitor::Channel;
use heatbound::wire::Frame;
use serde_json::{Value, json};

/// `frame`, received at `host_ms`, as one JSON object.
///
/// ```
/// use heatbound::wire::{Frame, Reply, ReplyCode};
/// let r = Frame::Reply(Reply { counter: 3, t_ms: 1500, code: ReplyCode::Replayed });
/// let v = heatbound_host::frame_json::frame_json(&r, 1_700_000_000_000);
/// assert_eq!(v["kind"], "reply");
/// assert_eq!(v["code"], "replayed");
/// ```
pub fn frame_json(frame: &Frame, host_ms: i64) -> Value {
    let f = |x: f32| f64::from(x);
    let o = |x: Option<f32>| x.map(f64::from);
    match frame {
        Frame::Hello(h) => {
            let (a, b, c) = h.firmware_version;
            let u = &h.uncertainty;
            json!({
                "kind": "hello",
                "host_ms": host_ms,
                "rig_id": h.rig_id.as_str(),
                "firmware_version": format!("{a}.{b}.{c}"),
                "sample_period_ms": h.sample_period_ms,
                "window_samples": h.window_samples,
                "mode": h.mode.as_str(),
                "coverage_factor": f(h.coverage_factor),
                "ambient_k": o(h.ambient_k),
                "uncertainty": {
                    "hot_k": f(u.hot_k),
                    "cold_k": f(u.cold_k),
                    "heat_in_rel": f(u.heat_in_rel),
                    "work_rel": f(u.work_rel),
                    "heat_out_rel": f(u.heat_out_rel),
                },
                "config_digest": format!("{:08x}", h.config_digest),
                "run": h.run,
                "session": h.session,
                "last_counter": h.last_counter,
                "keyed": h.keyed,
            })
        }
        Frame::Summary(s) => {
            let cold = (s.entropy_out_j_per_k > 0.0)
                .then(|| f64::from(s.heat_out_j) / f64::from(s.entropy_out_j_per_k))
                .filter(|t| t.is_finite());
            let faults: Vec<&str> = Channel::ALL
                .iter()
                .filter(|c| s.faults.has(**c))
                .map(|c| c.as_str())
                .collect();
            let alarms: Vec<&str> = RuleId::ALL
                .iter()
                .filter(|r| s.alarms & (1 << r.index()) != 0)
                .map(|r| r.as_str())
                .collect();
            json!({
                "kind": "summary",
                "host_ms": host_ms,
                "seq": s.seq,
                "t_ms": s.t_ms,
                "duration_s": f(s.duration_s),
                "heat_in_j": f(s.heat_in_j),
                "work_j": f(s.work_j),
                "heat_out_j": f(s.heat_out_j),
                "entropy_in_j_per_k": f(s.entropy_in_j_per_k),
                "entropy_out_j_per_k": f(s.entropy_out_j_per_k),
                "hot_mean_k": o(s.hot_mean_k()),
                "cold_mean_k": cold,
                "ambient_k": o(s.ambient_k),
                "performance": o(s.performance()),
                "bound": o(s.bound()),
                "entropy_rate_w_per_k": o(s.entropy_rate_w_per_k),
                "u_performance": o(s.u_performance),
                "u_bound": o(s.u_bound),
                "u_margin": o(s.u_margin),
                "u_entropy_rate_w_per_k": o(s.u_entropy_rate_w_per_k),
                "steady": s.status.steady,
                "heat_out_measured": s.status.heat_out_measured,
                "trip_active": s.status.trip_active,
                "faulty_channels": faults,
                "stale": s.faults.stale,
                "alarms": alarms,
                "hot2_measured": s.status.hot2_measured,
                "verdict": verdict(&s.verdict),
            })
        }
        Frame::Event(e) => json!({
            "kind": "event",
            "host_ms": host_ms,
            "seq": e.seq,
            "t_ms": e.event.t_ms,
            "rule": e.event.rule.as_str(),
            "event": e.event.kind.as_str(),
            "severity": e.event.severity.as_str(),
            "verdict": verdict(&e.verdict),
        }),
        Frame::Reply(r) => json!({
            "kind": "reply",
            "host_ms": host_ms,
            "counter": r.counter,
            "t_ms": r.t_ms,
            "code": r.code.as_str(),
            "meaning": r.code.meaning(),
        }),
    }
}

/// A controller's diagnosis: `consistent` (true, false, or null when none
/// was made), the `suspect` channel or null, and its `bias` (K for a
/// temperature, relative for a power) or null.
fn verdict(v: &heatbound::wire::Verdict) -> Value {
    json!({
        "consistent": v.consistent,
        "suspect": v.suspect.map(Channel::name),
        "bias": v.bias.filter(|b| b.is_finite()).map(f64::from),
    })
}
