//! WAV out, for synthesis (atomic).

use crate::base::error::{Result, TonusError};
use std::path::Path;

/// Writes mono samples as a WAV file; used by synthesis. `bits` is 16, 24
/// or 32 (float when `float`). Samples beyond full scale are clipped, as a
/// real converter would.
///
/// The file is written to a temporary name and renamed, so a failure never
/// leaves a half-written recording.
pub fn write_wav(
    path: &Path,
    samples: &[f64],
    sample_rate_hz: u32,
    bits: u16,
    float: bool,
) -> Result<()> {
    let wav_spec = hound::WavSpec {
        channels: 1,
        sample_rate: sample_rate_hz,
        bits_per_sample: bits,
        sample_format: if float {
            hound::SampleFormat::Float
        } else {
            hound::SampleFormat::Int
        },
    };
    let werr = |e: String| TonusError::Write {
        path: path.to_path_buf(),
        reason: e,
    };
    let tmp = crate::base::files::temp_path(path);
    {
        let mut w = hound::WavWriter::create(&tmp, wav_spec).map_err(|e| werr(e.to_string()))?;
        let result: std::result::Result<(), hound::Error> = (|| {
            if float {
                for &x in samples {
                    w.write_sample(x.clamp(-1.0, 1.0) as f32)?;
                }
            } else {
                let scale = 2f64.powi(bits as i32 - 1);
                for &x in samples {
                    let v = (x * scale).round().clamp(-scale, scale - 1.0) as i32;
                    w.write_sample(v)?;
                }
            }
            w.finalize()
        })();
        if let Err(e) = result {
            let _ = std::fs::remove_file(&tmp);
            return Err(werr(e.to_string()));
        }
    }
    std::fs::rename(&tmp, path).map_err(|e| werr(e.to_string()))
}
