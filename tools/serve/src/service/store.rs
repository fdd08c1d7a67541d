//! The job table: one SQLite file in the workspace (`jobs.sqlite`), so jobs outlive the
//! server. A status only moves forward (accepted → running → successful | failed | dismissed);
//! each change is one conditional UPDATE, so a dismissal and a finishing run cannot both win.

use rusqlite::{params, Connection, OptionalExtension, Row};
use serde_json::Value;

/// Why jobs that were queued or running when the service stopped read as failed.
pub const STOPPED: &str = "the service stopped while the job ran";

/// The states of OGC API – Processes' `statusCode.yaml`.
pub const STATUSES: &[&str] = &["accepted", "running", "successful", "failed", "dismissed"];

const SCHEMA: &str = "
CREATE TABLE IF NOT EXISTS jobs (
    seq        INTEGER PRIMARY KEY AUTOINCREMENT,
    id         TEXT NOT NULL UNIQUE,
    process_id TEXT NOT NULL,
    status     TEXT NOT NULL CHECK (status IN
                   ('accepted', 'running', 'successful', 'failed', 'dismissed')),
    message    TEXT NOT NULL DEFAULT '',
    progress   INTEGER NOT NULL DEFAULT 0 CHECK (progress BETWEEN 0 AND 100),
    created    TEXT NOT NULL,
    started    TEXT,
    finished   TEXT,
    updated    TEXT NOT NULL,
    request    TEXT NOT NULL,
    arguments  TEXT NOT NULL,
    output     TEXT,
    summary    TEXT,
    exit_code  INTEGER,
    previews   TEXT
);";

/// One row of the job table.
#[derive(Debug, Clone, PartialEq)]
pub struct Job {
    /// The job id (made by the service).
    pub id: String,
    /// The process run.
    pub process_id: String,
    /// One of [`STATUSES`].
    pub status: String,
    /// The tool's current phase, or why it failed.
    pub message: String,
    /// 0–100.
    pub progress: u8,
    /// RFC 3339 times.
    pub created: String,
    /// When the tool started.
    pub started: Option<String>,
    /// When it ended (or was dismissed).
    pub finished: Option<String>,
    /// Last change.
    pub updated: String,
    /// The execute request (JSON).
    pub request: Value,
    /// The tool's arguments (JSON array of strings).
    pub arguments: Value,
    /// The output GeoPackage, relative to the workspace.
    pub output: Option<String>,
    /// The tool's JSON summary, once it succeeded.
    pub summary: Option<Value>,
    /// The tool's exit code.
    pub exit_code: Option<i32>,
    /// Layers of the output that can be previewed (JSON array), once it succeeded.
    pub previews: Option<Value>,
}

impl Job {
    /// Whether the job has ended (successfully or not).
    pub fn finished(&self) -> bool {
        matches!(self.status.as_str(), "successful" | "failed" | "dismissed")
    }
}

/// The current time as RFC 3339 (UTC, milliseconds).
pub fn now() -> String {
    chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Millis, true)
}

/// The job table.
pub struct Store {
    db: Connection,
}

impl Store {
    /// Opens (creating if needed) the table in `path`, and marks jobs that were queued or
    /// running when a previous service stopped as failed ([`STOPPED`]). Returns how many.
    ///
    /// # Errors
    /// SQLite's message.
    pub fn open(path: &std::path::Path) -> rusqlite::Result<(Self, usize)> {
        let db = Connection::open(path)?;
        db.busy_timeout(std::time::Duration::from_secs(10))?;
        db.pragma_update(None, "journal_mode", "WAL")?;
        db.pragma_update(None, "synchronous", "NORMAL")?;
        db.execute_batch(SCHEMA)?;
        let store = Store { db };
        let recovered = store.recover()?;
        Ok((store, recovered))
    }

    fn recover(&self) -> rusqlite::Result<usize> {
        let now = now();
        self.db.execute(
            "UPDATE jobs SET status = 'failed', message = ?1, finished = ?2, updated = ?2
             WHERE status IN ('accepted', 'running')",
            params![STOPPED, now],
        )
    }

    /// Adds an accepted job.
    ///
    /// # Errors
    /// SQLite's message (e.g. a duplicate id).
    pub fn insert(
        &self,
        id: &str,
        process_id: &str,
        request: &Value,
        arguments: &Value,
        output: Option<&str>,
    ) -> rusqlite::Result<()> {
        let now = now();
        self.db.execute(
            "INSERT INTO jobs (id, process_id, status, message, created, updated, request,
                               arguments, output)
             VALUES (?1, ?2, 'accepted', 'queued', ?3, ?3, ?4, ?5, ?6)",
            params![
                id,
                process_id,
                now,
                request.to_string(),
                arguments.to_string(),
                output
            ],
        )?;
        Ok(())
    }

    /// accepted → running. Returns false when the job is no longer accepted (dismissed).
    ///
    /// # Errors
    /// SQLite's message.
    pub fn start(&self, id: &str) -> rusqlite::Result<bool> {
        let now = now();
        let n = self.db.execute(
            "UPDATE jobs SET status = 'running', message = 'started', started = ?2, updated = ?2
             WHERE id = ?1 AND status = 'accepted'",
            params![id, now],
        )?;
        Ok(n == 1)
    }

    /// Records progress of a running job.
    ///
    /// # Errors
    /// SQLite's message.
    pub fn progress(&self, id: &str, percent: u8, message: &str) -> rusqlite::Result<()> {
        self.db.execute(
            "UPDATE jobs SET progress = MAX(progress, ?2), message = ?3, updated = ?4
             WHERE id = ?1 AND status = 'running'",
            params![id, percent.min(99), message, now()],
        )?;
        Ok(())
    }

    /// running → successful (with the summary) or failed (with the reason). Returns false when
    /// the job was dismissed meanwhile.
    ///
    /// # Errors
    /// SQLite's message.
    pub fn finish(
        &self,
        id: &str,
        outcome: Result<&Value, &str>,
        exit_code: Option<i32>,
    ) -> rusqlite::Result<bool> {
        let now = now();
        let n = match outcome {
            Ok(summary) => self.db.execute(
                "UPDATE jobs SET status = 'successful', progress = 100, message = 'done',
                     summary = ?2, exit_code = ?3, finished = ?4, updated = ?4
                 WHERE id = ?1 AND status = 'running'",
                params![id, summary.to_string(), exit_code, now],
            )?,
            Err(reason) => self.db.execute(
                "UPDATE jobs SET status = 'failed', message = ?2, exit_code = ?3, finished = ?4,
                     updated = ?4
                 WHERE id = ?1 AND status IN ('accepted', 'running')",
                params![id, reason, exit_code, now],
            )?,
        };
        Ok(n == 1)
    }

    /// Records the layers of a job's output that can be previewed.
    ///
    /// # Errors
    /// SQLite's message.
    pub fn set_previews(&self, id: &str, previews: &Value) -> rusqlite::Result<()> {
        self.db.execute(
            "UPDATE jobs SET previews = ?2 WHERE id = ?1",
            params![id, previews.to_string()],
        )?;
        Ok(())
    }

    /// Marks a job dismissed. Returns its status before, or `None` for an unknown job.
    ///
    /// # Errors
    /// SQLite's message.
    pub fn dismiss(&self, id: &str) -> rusqlite::Result<Option<String>> {
        let before: Option<String> = self
            .db
            .query_row("SELECT status FROM jobs WHERE id = ?1", [id], |r| r.get(0))
            .optional()?;
        if before.is_some() {
            let now = now();
            self.db.execute(
                "UPDATE jobs SET status = 'dismissed', message = 'dismissed by a client',
                     finished = COALESCE(finished, ?2), updated = ?2
                 WHERE id = ?1",
                params![id, now],
            )?;
        }
        Ok(before)
    }

    /// One job.
    ///
    /// # Errors
    /// SQLite's message.
    pub fn get(&self, id: &str) -> rusqlite::Result<Option<Job>> {
        self.db
            .query_row(&format!("{SELECT} WHERE id = ?1"), [id], job_of)
            .optional()
    }

    /// Every job, oldest first, optionally only those of `process_id`.
    ///
    /// # Errors
    /// SQLite's message.
    pub fn list(&self, process_id: Option<&str>) -> rusqlite::Result<Vec<Job>> {
        let mut statement = self.db.prepare(&format!(
            "{SELECT} WHERE ?1 IS NULL OR process_id = ?1 ORDER BY seq"
        ))?;
        let rows = statement.query_map([process_id], job_of)?;
        rows.collect()
    }
}

const SELECT: &str = "SELECT id, process_id, status, message, progress, created, started,
    finished, updated, request, arguments, output, summary, exit_code, previews FROM jobs";

fn job_of(row: &Row) -> rusqlite::Result<Job> {
    let json = |i: usize| -> rusqlite::Result<Option<Value>> {
        let text: Option<String> = row.get(i)?;
        Ok(text.and_then(|t| serde_json::from_str(&t).ok()))
    };
    Ok(Job {
        id: row.get(0)?,
        process_id: row.get(1)?,
        status: row.get(2)?,
        message: row.get(3)?,
        progress: row.get::<_, i64>(4)?.clamp(0, 100) as u8,
        created: row.get(5)?,
        started: row.get(6)?,
        finished: row.get(7)?,
        updated: row.get(8)?,
        request: json(9)?.unwrap_or(Value::Null),
        arguments: json(10)?.unwrap_or(Value::Null),
        output: row.get(11)?,
        summary: json(12)?,
        exit_code: row.get(13)?,
        previews: json(14)?,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn a_job_moves_forward_and_a_dismissal_wins_over_a_late_finish() {
        let dir = tempfile::tempdir().expect("tempdir");
        let (store, recovered) = Store::open(&dir.path().join("jobs.sqlite")).expect("open");
        assert_eq!(recovered, 0);
        store
            .insert("a", "density", &json!({}), &json!([]), None)
            .expect("insert");
        assert_eq!(store.get("a").expect("get").expect("a").status, "accepted");
        assert!(store.start("a").expect("start"));
        assert!(!store.start("a").expect("start twice"));
        store
            .progress("a", 100, "replicates 5/9")
            .expect("progress");
        let job = store.get("a").expect("get").expect("a");
        // Only a finished job reads 100.
        assert_eq!((job.progress, job.message.as_str()), (99, "replicates 5/9"));
        store.progress("a", 10, "writing").expect("progress");
        assert_eq!(
            store.get("a").expect("get").expect("a").progress,
            99,
            "never decreases"
        );
        assert_eq!(
            store.dismiss("a").expect("dismiss").as_deref(),
            Some("running")
        );
        assert!(!store
            .finish("a", Ok(&json!({"x": 1})), Some(0))
            .expect("finish"));
        assert_eq!(store.get("a").expect("get").expect("a").status, "dismissed");
        assert_eq!(store.dismiss("zz").expect("dismiss"), None);
    }

    #[test]
    fn after_a_restart_finished_jobs_stay_and_unfinished_ones_read_failed() {
        let dir = tempfile::tempdir().expect("tempdir");
        let path = dir.path().join("jobs.sqlite");
        {
            let (store, _) = Store::open(&path).expect("open");
            for id in ["done", "running", "queued", "broken"] {
                store
                    .insert(
                        id,
                        "scan",
                        &json!({"inputs": {}}),
                        &json!(["--seed=1"]),
                        Some("o"),
                    )
                    .expect("insert");
            }
            store.start("done").expect("start");
            store
                .finish("done", Ok(&json!({"results": {"n": 3}})), Some(0))
                .expect("finish");
            store.start("running").expect("start");
            store.start("broken").expect("start");
            store
                .finish("broken", Err("bad layer"), Some(2))
                .expect("finish");
            // The store is dropped here as if the server were killed.
        }
        let (store, recovered) = Store::open(&path).expect("reopen");
        assert_eq!(recovered, 2);
        let jobs = store.list(None).expect("list");
        let ids: Vec<&str> = jobs.iter().map(|j| j.id.as_str()).collect();
        assert_eq!(ids, ["done", "running", "queued", "broken"]);
        let status: Vec<(&str, &str)> = jobs
            .iter()
            .map(|j| (j.status.as_str(), j.message.as_str()))
            .collect();
        assert_eq!(
            status,
            [
                ("successful", "done"),
                ("failed", STOPPED),
                ("failed", STOPPED),
                ("failed", "bad layer")
            ]
        );
        assert_eq!(jobs[0].summary, Some(json!({"results": {"n": 3}})));
        assert_eq!(jobs[0].progress, 100);
        assert!(jobs.iter().all(|j| j.finished.is_some() && j.finished()));
        assert_eq!(store.list(Some("density")).expect("list").len(), 0);
    }
}
