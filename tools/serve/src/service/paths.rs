//! The workspace: uploaded inputs in `files/`, one folder per job in `jobs/`, the job table in
//! `jobs.sqlite`. Clients name files, never paths: a name is one plain component that must stay
//! inside `files/` even after symlinks are followed.

use std::path::{Component, Path, PathBuf};

/// The folders of a workspace (absolute and canonical).
#[derive(Debug, Clone)]
pub struct Workspace {
    /// The workspace itself.
    pub root: PathBuf,
    /// Uploaded inputs, and outputs a client names.
    pub files: PathBuf,
    /// One folder per job (its output, logs and previews).
    pub jobs: PathBuf,
}

impl Workspace {
    /// Creates (if needed) and opens the workspace at `dir`.
    ///
    /// # Errors
    /// A one-line message naming the folder when it cannot be created or read.
    pub fn open(dir: &Path) -> Result<Self, String> {
        for sub in ["files", "jobs"] {
            std::fs::create_dir_all(dir.join(sub)).map_err(|e| {
                format!("--workspace {}: cannot create {sub}/ ({e})", dir.display())
            })?;
        }
        let root = dir
            .canonicalize()
            .map_err(|e| format!("--workspace {}: {e}", dir.display()))?;
        Ok(Workspace {
            files: root.join("files"),
            jobs: root.join("jobs"),
            root,
        })
    }

    /// The table of jobs.
    pub fn database(&self) -> PathBuf {
        self.root.join("jobs.sqlite")
    }

    /// The folder of job `id` (ids are made by the service, never by a client).
    pub fn job_dir(&self, id: &str) -> PathBuf {
        self.jobs.join(id)
    }

    /// An existing file of `files/` called `name`, checked to resolve inside `files/`.
    ///
    /// # Errors
    /// Why the name is refused (see [`check_name`]), or that the file does not exist.
    pub fn existing_file(&self, name: &str) -> Result<PathBuf, String> {
        check_name(name)?;
        let path = self.files.join(name);
        let real = path.canonicalize().map_err(|_| {
            format!("no file '{name}' in the workspace (upload it with PUT /files/{name})")
        })?;
        if !real.starts_with(&self.files) || !real.is_file() {
            return Err(format!(
                "'{name}' resolves outside the workspace's files/ folder or is not a file"
            ));
        }
        Ok(path)
    }

    /// A file of `files/` called `name` that a tool may write: absent, or an existing file that
    /// resolves inside `files/` (a symlink leading out is refused).
    ///
    /// # Errors
    /// Why the name is refused.
    pub fn writable_file(&self, name: &str) -> Result<PathBuf, String> {
        check_name(name)?;
        let path = self.files.join(name);
        if std::fs::symlink_metadata(&path).is_ok() {
            return self.existing_file(name);
        }
        Ok(path)
    }
}

/// A file name clients may use: one component of letters, digits, `_`, `-` and `.`, not
/// starting with `.` or `-` (no hidden files, no `..`, no options), at most 200 bytes.
///
/// # Errors
/// What is wrong with the name.
pub fn check_name(name: &str) -> Result<(), String> {
    if name.is_empty() || name.len() > 200 {
        return Err("a file name must have 1 to 200 characters".into());
    }
    if name.starts_with('/') || Path::new(name).is_absolute() {
        return Err(format!(
            "'{name}' is an absolute path; name a file of the workspace instead"
        ));
    }
    if name.split(['/', '\\']).any(|part| part == "..") {
        return Err(format!("'{name}' leaves the workspace ('..')"));
    }
    let plain = name
        .chars()
        .all(|c| c.is_ascii_alphanumeric() || matches!(c, '_' | '-' | '.'));
    if !plain || name.starts_with(['.', '-']) {
        return Err(format!(
            "'{name}' is not a plain file name (letters, digits, '_', '-', '.'; not starting \
             with '.' or '-')"
        ));
    }
    Ok(())
}

/// Whether a free-text value could be taken by a tool as a path outside the job's folder
/// (absolute, or with a `..` component). Tools run inside their job folder, so other relative
/// names stay there.
pub fn escapes_job_dir(value: &str) -> bool {
    let path = Path::new(value);
    value.starts_with('/')
        || value.starts_with('~')
        || path.is_absolute()
        || path.components().any(|c| matches!(c, Component::ParentDir))
        || value.split('\\').any(|part| part == "..")
}

/// `path` written relative to `base` (both absolute, inside one workspace): how a tool running
/// in `base` names it, without showing the server's folders in summaries and provenance.
pub fn relative_to(path: &Path, base: &Path) -> PathBuf {
    let from: Vec<Component> = base.components().collect();
    let to: Vec<Component> = path.components().collect();
    let common = from.iter().zip(&to).take_while(|(a, b)| a == b).count();
    let mut out = PathBuf::new();
    for _ in common..from.len() {
        out.push("..");
    }
    for part in &to[common..] {
        out.push(part.as_os_str());
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plain_names_pass_and_paths_are_refused() {
        for ok in ["sample.gpkg", "a_b-c.1.gpkg", "X"] {
            assert!(check_name(ok).is_ok(), "{ok}");
        }
        for bad in [
            "",
            "..",
            "../x.gpkg",
            "a/../../x",
            "/etc/passwd",
            "sub/x.gpkg",
            ".hidden",
            "-rf",
            "a b",
            "a\0b",
            "é.gpkg",
        ] {
            assert!(check_name(bad).is_err(), "{bad:?}");
        }
        assert!(check_name(&"a".repeat(201)).is_err());
    }

    #[test]
    fn a_symlink_out_of_the_workspace_is_refused() {
        let dir = tempfile::tempdir().expect("tempdir");
        let ws = Workspace::open(&dir.path().join("ws")).expect("workspace");
        let outside = dir.path().join("secret.gpkg");
        std::fs::write(&outside, b"x").expect("write");
        std::os::unix::fs::symlink(&outside, ws.files.join("link.gpkg")).expect("symlink");
        std::fs::write(ws.files.join("in.gpkg"), b"x").expect("write");
        let e = ws.existing_file("link.gpkg").expect_err("symlink out");
        assert!(e.contains("outside"), "{e}");
        let e = ws.writable_file("link.gpkg").expect_err("symlink out");
        assert!(e.contains("outside"), "{e}");
        assert!(ws.existing_file("in.gpkg").is_ok());
        assert!(ws.existing_file("missing.gpkg").is_err());
        assert_eq!(
            ws.writable_file("new.gpkg").expect("new"),
            ws.files.join("new.gpkg")
        );
        // A symlink inside the workspace is fine.
        std::os::unix::fs::symlink(ws.files.join("in.gpkg"), ws.files.join("alias.gpkg"))
            .expect("symlink");
        assert!(ws.existing_file("alias.gpkg").is_ok());
    }

    #[test]
    fn free_text_that_could_leave_the_job_folder_is_spotted() {
        for bad in ["/etc/passwd", "../x", "a/../../b", "~/x", "..\\x"] {
            assert!(escapes_job_dir(bad), "{bad}");
        }
        for ok in [
            "map.png",
            "support,oppose",
            "label=class,...",
            "EPSG:3035",
            "A/B ratio",
        ] {
            assert!(!escapes_job_dir(ok), "{ok}");
        }
    }

    #[test]
    fn paths_are_written_relative_to_the_job_folder() {
        let rel = relative_to(Path::new("/w/files/in.gpkg"), Path::new("/w/jobs/j1"));
        assert_eq!(rel, PathBuf::from("../../files/in.gpkg"));
        let rel = relative_to(Path::new("/w/jobs/j1/output.gpkg"), Path::new("/w/jobs/j1"));
        assert_eq!(rel, PathBuf::from("output.gpkg"));
    }
}
