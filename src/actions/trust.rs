//! Whether a config file may define commands: owned by us and writable only by us.
//!
//! This is the rule sshd applies with `StrictModes` (RELIABILITY §6): a file that another
//! user can write, or that another user owns, could make settle run their commands with our
//! rights. A refusal disables actions only; watching goes on.
//!
//! The current user id is read without `libc` (unsafe is forbidden crate-wide): from the
//! `Uid:` line of `/proc/self/status` (effective uid), else from the owner of `/proc/self`,
//! else from the owner of a file we create in the temporary directory (a new file belongs to
//! the effective user everywhere).

use std::fs::{self, File, OpenOptions};
use std::io::Read;
use std::os::unix::fs::MetadataExt;
use std::path::{Path, PathBuf};

use super::ActionError;

/// The effective user id of this process.
pub fn current_uid() -> Result<u32, ActionError> {
    if let Some(uid) =
        fs::read_to_string("/proc/self/status").ok().and_then(|s| uid_from_status(&s))
    {
        return Ok(uid);
    }
    if let Ok(m) = fs::metadata("/proc/self") {
        return Ok(m.uid());
    }
    uid_from_new_file()
}

/// The effective uid from the text of `/proc/self/status` (`Uid: real effective saved fs`).
fn uid_from_status(status: &str) -> Option<u32> {
    let line = status.lines().find(|l| l.starts_with("Uid:"))?;
    line["Uid:".len()..].split_whitespace().nth(1)?.parse().ok()
}

fn uid_from_new_file() -> Result<u32, ActionError> {
    let dir = std::env::temp_dir();
    for attempt in 0..16u32 {
        let path = dir.join(format!(".settle-uid-{}-{attempt}", std::process::id()));
        if let Ok(f) = OpenOptions::new().write(true).create_new(true).open(&path) {
            let uid = f.metadata().map(|m| m.uid());
            let _ = fs::remove_file(&path);
            return uid.map_err(|e| ActionError::Uid(e.to_string()));
        }
    }
    Err(ActionError::Uid(format!("could not create a probe file in {}", dir.display())))
}

/// Check owner and mode of a config file's metadata (pure: testable for any uid).
pub fn check_metadata(path: &Path, mode: u32, owner: u32, uid: u32) -> Result<(), ActionError> {
    let mode = mode & 0o7777;
    if owner != uid {
        return Err(ActionError::NotOwned { path: path.to_path_buf(), mode, owner, uid });
    }
    if mode & 0o022 != 0 {
        return Err(ActionError::Writable { path: path.to_path_buf(), mode, owner });
    }
    Ok(())
}

/// Check that `path` (after following symlinks) is a regular file owned by the current user
/// and not writable by group or others.
pub fn check_config_file(path: &Path) -> Result<(), ActionError> {
    let meta = fs::metadata(path).map_err(|e| stat_error(path, e))?;
    check_opened_metadata(path, &meta)
}

/// Read a config file's text only if it passes [`check_config_file`], checking the very file
/// that was opened (`fstat` on the open handle), so a swap between check and read cannot
/// slip in another file.
pub fn read_trusted_config(path: &Path) -> Result<String, ActionError> {
    let mut file = File::open(path).map_err(|e| stat_error(path, e))?;
    let meta = file.metadata().map_err(|e| stat_error(path, e))?;
    check_opened_metadata(path, &meta)?;
    let mut text = String::new();
    file.read_to_string(&mut text).map_err(|e| stat_error(path, e))?;
    Ok(text)
}

fn check_opened_metadata(path: &Path, meta: &fs::Metadata) -> Result<(), ActionError> {
    if !meta.is_file() {
        return Err(ActionError::Config {
            path: path.to_path_buf(),
            message: "is not a regular file".into(),
        });
    }
    check_metadata(path, meta.mode(), meta.uid(), current_uid()?)
}

fn stat_error(path: &Path, e: std::io::Error) -> ActionError {
    ActionError::Io { path: PathBuf::from(path), message: e.to_string() }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn status_uid_is_the_effective_one() {
        let status =
            "Name:\tsettle\nUmask:\t0022\nUid:\t1000\t1001\t1002\t1003\nGid:\t5\t5\t5\t5\n";
        assert_eq!(uid_from_status(status), Some(1001));
        assert_eq!(uid_from_status("Name: x\n"), None);
        assert_eq!(uid_from_status("Uid:\tabc\tdef\n"), None);
    }

    #[test]
    fn current_uid_matches_owner_of_a_new_file() {
        let dir = tempfile::tempdir().expect("tempdir");
        let p = dir.path().join("f");
        fs::write(&p, "x").expect("write");
        let owner = fs::metadata(&p).expect("stat").uid();
        assert_eq!(current_uid().expect("uid"), owner);
        assert_eq!(uid_from_new_file().expect("uid"), owner);
    }

    #[test]
    fn metadata_rules() {
        let p = Path::new("/case/settle.toml");
        assert!(check_metadata(p, 0o100644, 7, 7).is_ok());
        assert!(check_metadata(p, 0o100600, 7, 7).is_ok());
        assert!(check_metadata(p, 0o100444, 7, 7).is_ok());
        let g = check_metadata(p, 0o100664, 7, 7).expect_err("group-writable");
        assert_eq!(
            g.to_string(),
            "refusing actions from /case/settle.toml: it is writable by group or others \
             (mode 0664, owner uid 7); actions need a config only you can write \
             (chmod go-w /case/settle.toml)"
        );
        assert!(check_metadata(p, 0o100646, 7, 7).is_err());
        let o = check_metadata(p, 0o100644, 8, 7).expect_err("foreign owner");
        assert_eq!(
            o.to_string(),
            "refusing actions from /case/settle.toml: it is owned by uid 8, not by you \
             (uid 7; mode 0644)"
        );
    }
}
