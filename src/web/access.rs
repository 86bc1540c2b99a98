//! Who may read the pages: loopback by default; any other address only with a token that a
//! person types in once and the browser then keeps in an HttpOnly cookie.

use std::net::SocketAddr;
use std::path::Path;

use crate::error::{Error, Result};

/// Name of the cookie that carries the token.
pub const COOKIE: &str = "resinlot_token";

/// Fewest characters a token may have (16 random bytes written as hex are 32).
pub const MIN_TOKEN_LEN: usize = 20;

/// Refuses a non-loopback bind address without a token: the record must not be open to the
/// whole network by accident.
pub fn check_bind(bind: SocketAddr, has_token: bool) -> Result<()> {
    if bind.ip().is_loopback() || has_token {
        return Ok(());
    }
    Err(Error::invalid(
        format!("--bind {bind}"),
        "is not a loopback address, and no --token-file was given",
        "To let colleagues on other PCs read the pages, give --token-file FILE holding a random \
         token (for example: head -c 24 /dev/urandom | base64 > serve-token.txt) and hand them \
         the token; or keep the default 127.0.0.1:8640 for this PC only.",
    ))
}

/// True for a character a token may hold (letters, digits and `-_.~+/=`, so it fits a cookie
/// value as it is).
fn token_char(c: char) -> bool {
    c.is_ascii_alphanumeric() || "-_.~+/=".contains(c)
}

/// Reads the token from its file: the first line, without surrounding white space; at least
/// [`MIN_TOKEN_LEN`] characters of letters, digits and `-_.~+/=`.
pub fn read_token(path: &Path) -> Result<String> {
    let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, "reading", e))?;
    let token = text.lines().next().unwrap_or("").trim().to_string();
    let fix = "Write one line of at least 20 random characters (letters, digits, -_.~+/=) to the \
               file, for example: head -c 24 /dev/urandom | base64 > serve-token.txt";
    if token.chars().count() < MIN_TOKEN_LEN {
        return Err(Error::invalid(
            format!("{}:1", path.display()),
            format!(
                "the token is {} characters long, fewer than {MIN_TOKEN_LEN}",
                token.chars().count()
            ),
            fix,
        ));
    }
    if let Some(c) = token.chars().find(|c| !token_char(*c)) {
        return Err(Error::invalid(
            format!("{}:1", path.display()),
            format!("the token holds the character {c:?}, which a cookie cannot carry"),
            fix,
        ));
    }
    Ok(token)
}

/// Compares two strings in time that depends only on their lengths, so the answer time does
/// not tell how much of a guessed token was right (common practice for secrets).
pub fn same_secret(a: &str, b: &str) -> bool {
    let (a, b) = (a.as_bytes(), b.as_bytes());
    a.len() == b.len() && a.iter().zip(b).fold(0u8, |acc, (x, y)| acc | (x ^ y)) == 0
}

/// The value of cookie `name` in a `Cookie` request header (`a=1; b=2`), if present.
pub fn cookie_value<'h>(header: &'h str, name: &str) -> Option<&'h str> {
    header.split(';').find_map(|pair| {
        let (k, v) = pair.trim().split_once('=')?;
        (k == name).then_some(v)
    })
}

/// The `Set-Cookie` value that keeps `token` in the browser: HttpOnly (no script can read it),
/// SameSite=Strict (no other site's page can send it), for the whole site, for 30 days.
pub fn set_cookie(token: &str) -> String {
    format!("{COOKIE}={token}; HttpOnly; SameSite=Strict; Path=/; Max-Age=2592000")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_loopback_is_open_without_a_token() {
        assert!(check_bind("127.0.0.1:8640".parse().unwrap(), false).is_ok());
        assert!(check_bind("[::1]:8640".parse().unwrap(), false).is_ok());
        let e = check_bind("0.0.0.0:8640".parse().unwrap(), false).unwrap_err();
        assert!(e.to_string().contains("--token-file"), "{e}");
        assert!(check_bind("0.0.0.0:8640".parse().unwrap(), true).is_ok());
    }

    #[test]
    fn tokens_are_read_checked_and_compared() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("t.txt");
        std::fs::write(&p, "  Zm9vYmFyYmF6cXV4cXV1eHh5eg==  \nignored\n").unwrap();
        let t = read_token(&p).unwrap();
        assert_eq!(t, "Zm9vYmFyYmF6cXV4cXV1eHh5eg==");
        assert!(same_secret(&t, "Zm9vYmFyYmF6cXV4cXV1eHh5eg=="));
        assert!(!same_secret(&t, "Zm9vYmFyYmF6cXV4cXV1eHh5eg=!"));
        assert!(!same_secret(&t, "short"));
        std::fs::write(&p, "short\n").unwrap();
        assert!(read_token(&p)
            .unwrap_err()
            .to_string()
            .contains("fewer than 20"));
        std::fs::write(&p, "abcdefghijklmnopqrstuv;w\n").unwrap();
        assert!(read_token(&p).unwrap_err().to_string().contains("';'"));
    }

    #[test]
    fn the_cookie_is_found_among_others() {
        let h = "theme=dark; resinlot_token=abc=; other=1";
        assert_eq!(cookie_value(h, COOKIE), Some("abc="));
        assert_eq!(cookie_value("theme=dark", COOKIE), None);
        assert!(set_cookie("abc").contains("HttpOnly"));
    }
}
