//! The file identifier of a generated PDF, made reproducible (certificates and trend reports).

/// Length of each of the two identifier strings printpdf writes, in characters.
const LEN: usize = 32;

/// Replaces the random file identifier printpdf writes into the trailer (`/ID[(..)(..)]`,
/// ISO 32000-1 §14.4) with the first 32 upper-case hex digits of `sha256`, a digest of the
/// document's content, so the same content always gives the same bytes. Permanent and
/// instance identifier are set equal (a file that is never updated); both keep their length
/// of 32 characters, so no byte offset in the file moves. Bytes without such a trailer are
/// left as they are.
pub fn set_document_id(bytes: &mut [u8], sha256: &[u8; 32]) {
    const MARK: &[u8] = b"/ID[(";
    let Some(start) = bytes.windows(MARK.len()).rposition(|w| w == MARK) else {
        return;
    };
    let first = start + MARK.len();
    let second = first + LEN + 2; // skip ")("
    if bytes.len() < second + LEN || &bytes[first + LEN..second] != b")(" {
        return;
    }
    let hex: String = sha256.iter().map(|b| format!("{b:02X}")).collect();
    bytes[first..first + LEN].copy_from_slice(&hex.as_bytes()[..LEN]);
    bytes[second..second + LEN].copy_from_slice(&hex.as_bytes()[..LEN]);
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn both_identifier_strings_take_the_digest() {
        let random = "0123456789abcdef0123456789abcdef";
        let mut pdf = format!("trailer<</ID[({random})({random})]>>").into_bytes();
        let mut digest = [0u8; 32];
        digest[0] = 0xAB;
        digest[15] = 0x01;
        set_document_id(&mut pdf, &digest);
        let want = "AB000000000000000000000000000001";
        assert_eq!(
            String::from_utf8(pdf).unwrap(),
            format!("trailer<</ID[({want})({want})]>>")
        );
    }

    #[test]
    fn bytes_without_the_trailer_identifier_are_left_alone() {
        for text in ["no trailer", "/ID[(short)(short)]", "/ID[("] {
            let mut pdf = text.as_bytes().to_vec();
            set_document_id(&mut pdf, &[7; 32]);
            assert_eq!(pdf, text.as_bytes());
        }
    }
}
