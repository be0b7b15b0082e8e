//! The JSON writer: the result structs as they are, pretty-printed; for a time-domain fit,
//! every finding (caution or verdict) also carries its sentence as `message`.

use super::{findings, spectrum};
use crate::spectral::analysis::SpectrumReport;
use crate::spectral::findings::{SpectralCaution, SpectralVerdict};
use crate::twotime::{Caution, FitReport, Verdict};
use serde::Serialize;
use serde_json::Value;

/// Serializes any result to pretty JSON bytes, ending with a newline.
pub fn to_json<T: Serialize>(result: &T) -> Vec<u8> {
    finish(serde_json::to_vec_pretty(result))
}

/// A free-form JSON value (a truth file) with its keys in sorted order at every level, as
/// they were written before struct order was kept for results.
pub fn sorted_json(value: &Value) -> Vec<u8> {
    let mut v = value.clone();
    v.sort_all_objects();
    to_json(&v)
}

/// A time-domain fit as JSON: the result as it is, with a `message` beside the code of
/// every caution and verdict (the sentence the text report prints).
pub fn fit_json(r: &FitReport) -> Vec<u8> {
    let value = serde_json::to_value(r).map(|mut v| {
        add_messages(&mut v, &r.verdict, &r.cautions);
        if let Some(Value::Array(fits)) = v.get_mut("fits") {
            for (fv, f) in fits.iter_mut().zip(&r.fits) {
                add_messages(fv, &f.verdict, &f.cautions);
            }
        }
        v
    });
    finish(value.and_then(|v| serde_json::to_vec_pretty(&v)))
}

/// A spectral analysis as JSON: the result as it is, with a `message` beside the code of
/// every caution and verdict.
pub fn spectrum_json(r: &SpectrumReport) -> Vec<u8> {
    let value = serde_json::to_value(r).map(|mut v| {
        spectral_messages(&mut v, None, &r.cautions);
        if let Some(Value::Array(fits)) = v.get_mut("spectra") {
            for (fv, f) in fits.iter_mut().zip(&r.spectra) {
                spectral_messages(fv, Some(&f.verdict), &f.cautions);
            }
        }
        v
    });
    finish(value.and_then(|v| serde_json::to_vec_pretty(&v)))
}

fn spectral_messages(
    v: &mut Value,
    verdict: Option<&SpectralVerdict>,
    cautions: &[SpectralCaution],
) {
    if let (Some(Value::Object(m)), Some(verdict)) = (v.get_mut("verdict"), verdict) {
        m.insert("message".into(), spectrum::verdict(verdict).into());
    }
    if let Some(Value::Array(a)) = v.get_mut("cautions") {
        for (cv, c) in a.iter_mut().zip(cautions) {
            if let Value::Object(m) = cv {
                m.insert("message".into(), spectrum::caution(c).into());
            }
        }
    }
}

fn add_messages(v: &mut Value, verdict: &Verdict, cautions: &[Caution]) {
    if let Some(Value::Object(m)) = v.get_mut("verdict") {
        m.insert("message".into(), findings::verdict(verdict).into());
    }
    if let Some(Value::Array(a)) = v.get_mut("cautions") {
        for (cv, c) in a.iter_mut().zip(cautions) {
            if let Value::Object(m) = cv {
                m.insert("message".into(), findings::caution(c).into());
            }
        }
    }
}

fn finish(bytes: serde_json::Result<Vec<u8>>) -> Vec<u8> {
    let mut out = bytes.unwrap_or_else(|e| {
        format!("{{\"error\": \"cannot serialize the result: {e}\"}}").into_bytes()
    });
    out.push(b'\n');
    out
}
