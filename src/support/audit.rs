//! Attribution for the record: the operating-system login name of the person running the
//! command, and the SHA-256 of the files a decision was made from.

use sha2::{Digest, Sha256};

/// SHA-256 of `bytes`, lower-case hex (FIPS 180-4).
pub fn sha256_hex(bytes: &[u8]) -> String {
    Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// The login name of the person running this process, recorded as `recorded_by`.
///
/// Chosen: the user name of the passwd entry of the process's real user id
/// (`getpwuid_r(getuid())`, POSIX.1-2017), which a user cannot change by setting an
/// environment variable the way `USER` or `LOGNAME` can be set. Only when the uid has no
/// passwd entry (some containers) is `LOGNAME`, then `USER`, used; when neither is set, the
/// uid itself as `uid N`. The result is one printable line (control characters are dropped).
pub fn login_name() -> String {
    let name = passwd_name().or_else(|| {
        ["LOGNAME", "USER"]
            .iter()
            .filter_map(|v| std::env::var(v).ok())
            .map(|v| v.trim().to_string())
            .find(|v| !v.is_empty())
    });
    let name = name.unwrap_or_else(|| format!("uid {}", uid()));
    name.chars().filter(|c| !c.is_control()).take(64).collect()
}

/// [`login_name`], looked up once per process (a release records it on every row).
pub fn recorded_by() -> &'static str {
    static NAME: std::sync::OnceLock<String> = std::sync::OnceLock::new();
    NAME.get_or_init(login_name)
}

/// The real user id of the process.
fn uid() -> u32 {
    // SAFETY: getuid has no preconditions and cannot fail (POSIX.1-2017).
    unsafe { libc::getuid() }
}

/// The user name of the real uid's passwd entry, if it has one.
fn passwd_name() -> Option<String> {
    let mut buf = vec![0 as libc::c_char; 4096];
    // SAFETY: an all-zero passwd is a valid value of this plain C struct.
    let mut pwd: libc::passwd = unsafe { std::mem::zeroed() };
    let mut result: *mut libc::passwd = std::ptr::null_mut();
    // SAFETY: every pointer is valid for the call; buf outlives the use of pwd's fields.
    let rc = unsafe { libc::getpwuid_r(uid(), &mut pwd, buf.as_mut_ptr(), buf.len(), &mut result) };
    if rc != 0 || result.is_null() || pwd.pw_name.is_null() {
        return None;
    }
    // SAFETY: on success pw_name points to a NUL-terminated string inside buf.
    let name = unsafe { std::ffi::CStr::from_ptr(pwd.pw_name) };
    let name = name.to_string_lossy().trim().to_string();
    (!name.is_empty()).then_some(name)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha256_of_abc_is_the_fips_example() {
        // FIPS 180-4 / NIST CSRC example "abc".
        assert_eq!(
            sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn login_name_is_the_passwd_entry_not_the_environment() {
        // `id -un` prints the name of the real uid's passwd entry (POSIX id utility).
        let out = std::process::Command::new("id")
            .arg("-un")
            .output()
            .expect("the POSIX id utility runs");
        let expected = String::from_utf8_lossy(&out.stdout).trim().to_string();
        assert!(!expected.is_empty());
        assert_eq!(passwd_name().as_deref(), Some(expected.as_str()));
        assert_eq!(login_name(), expected);
    }
}
