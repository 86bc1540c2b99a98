//! The identity of a generated PDF (creator, producer, dates, file identifier), made
//! reproducible, for the certificates and the trend reports.

/// Names resinlot as creator and producer of `doc` and dates it (creation, modification and
/// metadata date) `day` at 00:00 UTC, so the file is reproducible; a day printpdf cannot
/// represent leaves the dates as they are.
pub fn set_creator_and_day(doc: &mut printpdf::PdfDocument, day: chrono::NaiveDate) {
    doc.metadata.info.creator = "resinlot".to_string();
    doc.metadata.info.producer = "resinlot (printpdf)".to_string();
    let date = day
        .and_hms_opt(0, 0, 0)
        .map(|t| t.and_utc().timestamp())
        .and_then(|ts| printpdf::OffsetDateTime::from_unix_timestamp(ts).ok());
    if let Some(date) = date {
        doc.metadata.info.creation_date = date;
        doc.metadata.info.modification_date = date;
        doc.metadata.info.metadata_date = date;
    }
}

/// Blanks out the empty `/GTS_PDFXVersion()` entry printpdf 0.12 writes into every document
/// information dictionary. The key declares PDF/X conformance (ISO 15930), so readers report
/// a file carrying it as PDF/X even when empty; resinlot's PDFs are plain PDF and claim no
/// conformance (issue #17). The entry is overwritten with spaces, which a dictionary allows
/// between entries (ISO 32000-1 §7.2.2), so no byte offset in the file moves. A file without
/// the empty entry is left as it is.
pub fn drop_empty_pdfx_version(bytes: &mut [u8]) {
    const ENTRY: &[u8] = b"/GTS_PDFXVersion()";
    if let Some(at) = bytes.windows(ENTRY.len()).position(|w| w == ENTRY) {
        bytes[at..at + ENTRY.len()].fill(b' ');
    }
}

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
    fn creator_and_day_at_midnight_utc() {
        let mut doc = printpdf::PdfDocument::new("t");
        set_creator_and_day(
            &mut doc,
            chrono::NaiveDate::from_ymd_opt(2026, 4, 2).unwrap(),
        );
        let info = &doc.metadata.info;
        assert_eq!(info.creator, "resinlot");
        assert_eq!(info.producer, "resinlot (printpdf)");
        // First principles: 2026-04-02 00:00 UTC is 1 775 088 000 s after the Unix epoch.
        for date in [
            info.creation_date,
            info.modification_date,
            info.metadata_date,
        ] {
            assert_eq!(date.unix_timestamp(), 1_775_088_000);
        }
    }

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
    fn the_empty_pdfx_claim_is_blanked_in_place() {
        let mut pdf = b"<</Trapped/False/GTS_PDFXVersion()/Title(x)>>".to_vec();
        let len = pdf.len();
        drop_empty_pdfx_version(&mut pdf);
        assert_eq!(pdf.len(), len);
        assert_eq!(
            pdf,
            b"<</Trapped/False                  /Title(x)>>".to_vec()
        );
        // A real version string is not ours to remove.
        let mut real = b"/GTS_PDFXVersion(PDF/X-3:2002)".to_vec();
        drop_empty_pdfx_version(&mut real);
        assert_eq!(real, b"/GTS_PDFXVersion(PDF/X-3:2002)".to_vec());
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
