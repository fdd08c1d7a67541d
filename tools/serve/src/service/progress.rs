//! Reading a tool's stderr: JSON progress lines (`{"progress":0.42,"phase":"replicates",
//! "done":420,"total":999}`, see `stance_core::host::progress`) and, otherwise, log lines;
//! on failure the last log line is the error line.

use serde_json::Value;

/// One progress line.
#[derive(Debug, Clone, PartialEq)]
pub struct Progress {
    /// Percent of the run done, 0–100 (the fraction rounded down).
    pub percent: u8,
    /// The tool's current step.
    pub phase: String,
    /// Units of the phase done and in all, when the tool counts them.
    pub counts: Option<(u64, u64)>,
}

/// The progress in `line`, or `None` when it is a log line (not a JSON object with a numeric
/// `progress`).
pub fn parse(line: &str) -> Option<Progress> {
    let line = line.trim();
    if !line.starts_with('{') {
        return None;
    }
    let value: Value = serde_json::from_str(line).ok()?;
    let fraction = value.get("progress")?.as_f64()?;
    if !fraction.is_finite() {
        return None;
    }
    let percent = (fraction.clamp(0.0, 1.0) * 100.0).floor() as u8;
    let phase = value
        .get("phase")
        .and_then(Value::as_str)
        .unwrap_or_default()
        .to_owned();
    let counts = match (
        value.get("done").and_then(Value::as_u64),
        value.get("total").and_then(Value::as_u64),
    ) {
        (Some(done), Some(total)) => Some((done, total)),
        _ => None,
    };
    Some(Progress {
        percent,
        phase,
        counts,
    })
}

impl Progress {
    /// The status message: the phase, with its counts when known (`replicates 420/999`).
    pub fn message(&self) -> String {
        match self.counts {
            Some((done, total)) => format!("{} {done}/{total}", self.phase),
            None => self.phase.clone(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The format documented in shared/src/host/progress.rs.
    #[test]
    fn progress_lines_are_read_and_log_lines_are_not() {
        let p = parse(r#"{"progress":0.42,"phase":"replicates","done":420,"total":999}"#)
            .expect("progress line");
        assert_eq!(p.percent, 42);
        assert_eq!(p.phase, "replicates");
        assert_eq!(p.counts, Some((420, 999)));
        assert_eq!(p.message(), "replicates 420/999");
        let p = parse(r#"{"progress":1.0,"phase":"done"}"#).expect("last line");
        assert_eq!((p.percent, p.message().as_str()), (100, "done"));
        // 0.999 is not yet done: rounded down.
        assert_eq!(
            parse(r#"{"progress":0.999,"phase":"x"}"#).map(|p| p.percent),
            Some(99)
        );
        // Out-of-range fractions are clamped.
        assert_eq!(
            parse(r#"{"progress":7,"phase":"x"}"#).map(|p| p.percent),
            Some(100)
        );
        assert_eq!(parse(r#"{"progress":-1}"#).map(|p| p.percent), Some(0));
        for log in [
            "stance-density: error: --layer: s.gpkg has several point layers",
            "",
            "{not json",
            r#"{"phase":"reading"}"#,
            r#"{"progress":"half"}"#,
            "[1, 2]",
        ] {
            assert_eq!(parse(log), None, "{log}");
        }
    }
}
