//! Whether a config file may define commands: owned by us and writable only by us, read
//! from a case directory no other user can rearrange.
//!
//! This is the rule sshd applies with `StrictModes` (RELIABILITY §6): a file that another
//! user can write, or that another user owns, could make settle run their commands with our
//! rights. A refusal disables actions only; watching goes on.
//!
//! * **One descriptor.** [`read_config`] opens the file once, takes owner, mode and type
//!   from that descriptor (`fstat`) and reads the text from the same descriptor, so the text
//!   that is checked is the text that is used: swapping the file under its name between two
//!   looks (`rename`, `renameat2(RENAME_EXCHANGE)`) cannot slip in another file. Nothing
//!   here looks at the file by name a second time.
//! * **The case directory** (where `settle.toml` is, and where commands run) must be owned
//!   by us or root and not writable by group or others, unless its sticky bit is set
//!   (then others cannot rename or remove our files in it). Otherwise another user could
//!   replace the config, the logs or a script between two runs of settle.
//!
//! The current user id is read without `libc` (unsafe is forbidden crate-wide): from the
//! `Uid:` line of `/proc/self/status` (effective uid), else from the owner of `/proc/self`,
//! else from the owner of a file we create in the temporary directory (a new file belongs to
//! the effective user everywhere).

use std::fs::{self, OpenOptions};
use std::io::Read;
use std::os::unix::fs::{MetadataExt, OpenOptionsExt};
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

/// Owner, mode and type of a config file, taken from the descriptor its text was read from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct FileFacts {
    /// Permission bits and file type (`st_mode`).
    pub mode: u32,
    /// Owner (`st_uid`).
    pub owner: u32,
    /// A regular file (not a FIFO, device or directory).
    pub regular: bool,
}

impl FileFacts {
    pub fn of(meta: &fs::Metadata) -> FileFacts {
        FileFacts { mode: meta.mode(), owner: meta.uid(), regular: meta.is_file() }
    }
}

/// Open `path` once, `fstat` the descriptor, and read the text from that same descriptor.
///
/// `O_NONBLOCK` keeps a FIFO planted under the name from blocking the open; anything but a
/// regular file is refused before a byte is read. The facts are those of the file whose
/// text is returned, whatever happens to the name meanwhile.
pub fn read_config(path: &Path) -> std::io::Result<(String, FileFacts)> {
    let mut file = OpenOptions::new().read(true).custom_flags(libc::O_NONBLOCK).open(path)?;
    let facts = FileFacts::of(&file.metadata()?);
    if !facts.regular {
        return Err(std::io::Error::new(std::io::ErrorKind::InvalidInput, "not a regular file"));
    }
    let mut bytes = Vec::new();
    file.read_to_end(&mut bytes)?;
    let text = String::from_utf8(bytes).map_err(|e| {
        let at = e.utf8_error().valid_up_to();
        std::io::Error::new(std::io::ErrorKind::InvalidData, format!("not UTF-8 text (byte {at})"))
    })?;
    Ok((text, facts))
}

/// Whether the config file described by `facts` (from [`read_config`]) may define commands:
/// a regular file owned by the current user, not writable by group or others.
pub fn check_facts(path: &Path, facts: &FileFacts) -> Result<(), ActionError> {
    if !facts.regular {
        return Err(ActionError::Config {
            path: path.to_path_buf(),
            message: "is not a regular file".into(),
        });
    }
    check_metadata(path, facts.mode, facts.owner, current_uid()?)
}

/// Check a directory's owner and mode (pure: testable for any uid). Owned by `uid` or root,
/// and not writable by group or others unless the sticky bit is set.
pub fn check_dir_metadata(dir: &Path, mode: u32, owner: u32, uid: u32) -> Result<(), ActionError> {
    let mode = mode & 0o7777;
    if owner != uid && owner != 0 {
        return Err(ActionError::UnsafeDir {
            path: dir.to_path_buf(),
            reason: format!("it is owned by uid {owner}, not by you (uid {uid}) or root"),
        });
    }
    if mode & 0o022 != 0 && mode & 0o1000 == 0 {
        return Err(ActionError::UnsafeDir {
            path: dir.to_path_buf(),
            reason: format!(
                "it is writable by group or others without the sticky bit (mode {mode:04o}), so \
                 another user could replace settle.toml, a log or a script in it \
                 (chmod go-w {})",
                dir.display()
            ),
        });
    }
    Ok(())
}

/// Check a case directory (the config's directory, the commands' working directory).
pub fn check_case_dir(dir: &Path) -> Result<(), ActionError> {
    let meta = fs::metadata(dir).map_err(|e| stat_error(dir, e))?;
    if !meta.is_dir() {
        return Err(ActionError::UnsafeDir {
            path: dir.to_path_buf(),
            reason: "it is not a directory".into(),
        });
    }
    check_dir_metadata(dir, meta.mode(), meta.uid(), current_uid()?)
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
    fn config_is_read_with_the_facts_of_the_same_file() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().expect("tempdir");
        let p = dir.path().join("settle.toml");
        fs::write(&p, "name = 'x'\n").expect("write");
        fs::set_permissions(&p, fs::Permissions::from_mode(0o640)).expect("chmod");
        let (text, facts) = read_config(&p).expect("read");
        assert_eq!(text, "name = 'x'\n");
        assert_eq!(facts.mode & 0o7777, 0o640);
        assert!(facts.regular);
        assert!(check_facts(&p, &facts).is_ok());
        fs::set_permissions(&p, fs::Permissions::from_mode(0o660)).expect("chmod");
        let (_, facts) = read_config(&p).expect("read");
        assert!(matches!(check_facts(&p, &facts), Err(ActionError::Writable { .. })));
        assert!(read_config(dir.path()).is_err(), "a directory is not a config");
    }

    #[test]
    fn directory_rules() {
        let d = Path::new("/case");
        assert!(check_dir_metadata(d, 0o40755, 7, 7).is_ok());
        assert!(check_dir_metadata(d, 0o40700, 0, 7).is_ok(), "root-owned is fine");
        assert!(check_dir_metadata(d, 0o41777, 0, 7).is_ok(), "sticky like /tmp");
        let w = check_dir_metadata(d, 0o40775, 7, 7).expect_err("group-writable");
        assert_eq!(
            w.to_string(),
            "refusing actions: the case directory /case is unsafe: it is writable by group or \
             others without the sticky bit (mode 0775), so another user could replace \
             settle.toml, a log or a script in it (chmod go-w /case)"
        );
        assert!(check_dir_metadata(d, 0o40757, 7, 7).is_err());
        let o = check_dir_metadata(d, 0o40755, 8, 7).expect_err("foreign owner");
        assert!(o.to_string().contains("owned by uid 8, not by you (uid 7) or root"), "{o}");
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
