//! CSV tables: the matched modes of one fit, and one summary row per
//! recording for the demo.
//!
//! Mode table columns: `m,n,labels,predicted_hz,measured_hz,measured_u_hz,
//! crlb_hz,residual_cents,level_db,snr_db,t60_s,decay_rate_db_per_s,
//! pair_lower_hz,pair_upper_hz,splitting_hz,splitting_u_hz,outlier`
//! (empty where a value does not apply).

use crate::fitting::measurement::Measurement;

/// The mode table as CSV text.
pub fn modes_csv(m: &Measurement) -> Result<String, csv::Error> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record([
        "m",
        "n",
        "labels",
        "predicted_hz",
        "measured_hz",
        "measured_u_hz",
        "crlb_hz",
        "residual_cents",
        "level_db",
        "snr_db",
        "t60_s",
        "decay_rate_db_per_s",
        "pair_lower_hz",
        "pair_upper_hz",
        "splitting_hz",
        "splitting_u_hz",
        "outlier",
    ])?;
    let opt = |v: Option<f64>, d: usize| v.map(|x| format!("{x:.d$}")).unwrap_or_default();
    for r in &m.modes {
        w.write_record([
            r.m.to_string(),
            r.n.to_string(),
            r.labels.clone(),
            format!("{:.4}", r.predicted_hz),
            format!("{:.4}", r.measured_hz),
            opt(r.measured_u_hz, 5),
            opt(r.crlb_hz, 5),
            format!("{:.3}", r.residual_cents),
            format!("{:.2}", r.level_db),
            format!("{:.2}", r.snr_db),
            opt(r.t60_s, 4),
            opt(r.decay_rate_db_per_s, 3),
            opt(r.pair.map(|p| p.lower.frequency_hz), 4),
            opt(r.pair.map(|p| p.upper.frequency_hz), 4),
            opt(r.pair.map(|p| p.splitting_hz), 4),
            opt(r.pair.map(|p| p.splitting_u_hz), 4),
            r.outlier.to_string(),
        ])?;
    }
    let bytes = w.into_inner().map_err(|e| e.into_error())?;
    Ok(String::from_utf8_lossy(&bytes).into_owned())
}

/// One summary row per recording: file, tension (N/m) and its standard
/// uncertainty, wave speed (m/s) and its standard uncertainty, modes used,
/// rms residual (cents), quality grade, error (for a file that failed).
pub fn summary_csv(
    rows: &[(String, Option<&Measurement>, Option<String>)],
) -> Result<String, csv::Error> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record([
        "file",
        "tension_n_per_m",
        "tension_u_n_per_m",
        "wave_speed_m_per_s",
        "wave_speed_u_m_per_s",
        "modes_used",
        "rms_residual_cents",
        "quality",
        "error",
    ])?;
    for (file, m, err) in rows {
        let f = m.and_then(|m| m.fit.as_ref());
        let t = m.and_then(|m| m.tension);
        w.write_record([
            file.clone(),
            t.map(|t| format!("{:.3}", t.value)).unwrap_or_default(),
            t.map(|t| format!("{:.3}", t.standard_uncertainty))
                .unwrap_or_default(),
            f.map(|f| format!("{:.4}", f.wave_speed.value))
                .unwrap_or_default(),
            f.map(|f| format!("{:.4}", f.wave_speed.standard_uncertainty))
                .unwrap_or_default(),
            f.map(|f| f.n_used.to_string()).unwrap_or_default(),
            f.map(|f| format!("{:.3}", f.rms_residual_cents))
                .unwrap_or_default(),
            m.map(|m| m.quality.grade.name().to_string())
                .unwrap_or_default(),
            err.clone().unwrap_or_default(),
        ])?;
    }
    let bytes = w.into_inner().map_err(|e| e.into_error())?;
    Ok(String::from_utf8_lossy(&bytes).into_owned())
}
