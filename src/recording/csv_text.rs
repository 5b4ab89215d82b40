//! CSV recordings: a time column and a voltage column, evenly spaced.

use super::*;

/// A CSV recording: a header line naming the columns, then one sample per line. Blank lines
/// and lines starting with `#` are skipped; fields may be quoted and padded; the separator
/// is a comma or a semicolon. The sample rate comes from the first two time stamps; every
/// later interval must agree with it within 1%.
pub(crate) fn open_csv(path: &Path, columns: &CsvColumns) -> Result<Samples, RecordingError> {
    let name = path.display().to_string();
    let io = |e: std::io::Error| RecordingError::Io {
        path: name.clone(),
        message: e.to_string(),
    };
    let file = File::open(path).map_err(io)?;
    let mut lines = BufReader::new(file).lines().enumerate();
    let line_error = |line: usize, message: String| RecordingError::Line {
        path: name.clone(),
        line,
        message,
    };
    // Header.
    let (header_line, header) = loop {
        match lines.next() {
            None => {
                return Err(RecordingError::Format {
                    path: name.clone(),
                    message: "the file is empty".into(),
                })
            }
            Some((k, line)) => {
                let line = line.map_err(io)?;
                let trimmed = line.trim();
                if trimmed.is_empty() || trimmed.starts_with('#') {
                    continue;
                }
                break (k + 1, line);
            }
        }
    };
    let separator = if header.contains(';') && !header.contains(',') {
        ';'
    } else {
        ','
    };
    let clean = |s: &str| s.trim().trim_matches('"').trim().to_string();
    let names: Vec<String> = header.split(separator).map(clean).collect();
    let find = |wanted: &str| names.iter().position(|n| n.eq_ignore_ascii_case(wanted));
    let time_col = find(&columns.time).ok_or_else(|| {
        line_error(
            header_line,
            format!(
                "no column `{}` (columns: {})",
                columns.time,
                names.join(", ")
            ),
        )
    })?;
    let volt_col = find(&columns.voltage).ok_or_else(|| {
        line_error(
            header_line,
            format!(
                "no column `{}` (columns: {})",
                columns.voltage,
                names.join(", ")
            ),
        )
    })?;
    let parse = move |k: usize, line: &str| -> Result<Option<(f64, f64)>, RecordingError> {
        let trimmed = line.trim();
        if trimmed.is_empty() || trimmed.starts_with('#') {
            return Ok(None);
        }
        let fields: Vec<String> = trimmed.split(separator).map(clean).collect();
        let get = |i: usize, what: &str| -> Result<f64, RecordingError> {
            let text = fields.get(i).ok_or_else(|| RecordingError::Line {
                path: String::new(),
                line: k,
                message: format!("missing the {what} field"),
            })?;
            match text.parse::<f64>() {
                Ok(v) if v.is_finite() => Ok(v),
                _ => Err(RecordingError::Line {
                    path: String::new(),
                    line: k,
                    message: format!("{what} `{text}` is not a finite number"),
                }),
            }
        };
        Ok(Some((get(time_col, "time")?, get(volt_col, "voltage")?)))
    };
    // Read the first two samples to learn the rate.
    let mut first = Vec::new();
    let mut rest_lines = lines;
    while first.len() < 2 {
        match rest_lines.next() {
            None => break,
            Some((k, line)) => {
                let line = line.map_err(io)?;
                if let Some(sample) = parse(k + 1, &line).map_err(|e| with_path(e, &name))? {
                    first.push(sample);
                }
            }
        }
    }
    if first.len() < 2 {
        return Err(RecordingError::Format {
            path: name.clone(),
            message: "the recording holds fewer than two samples".into(),
        });
    }
    let dt = first[1].0 - first[0].0;
    if dt <= 0.0 {
        return Err(line_error(
            header_line + 2,
            "time stamps must increase".into(),
        ));
    }
    let rate = 1.0 / dt;
    if rate < MIN_SAMPLE_RATE {
        return Err(RecordingError::Format {
            path: name.clone(),
            message: format!(
                "{rate:.0} samples per second is too few to follow the mains (at least {MIN_SAMPLE_RATE})"
            ),
        });
    }
    let mut last_time = first[1].0;
    let first_values = [first[0].1, first[1].1];
    let stream_name = name.clone();
    let rest = rest_lines.filter_map(move |(k, line)| {
        let line = match line {
            Ok(l) => l,
            Err(e) => {
                return Some(Err(RecordingError::Io {
                    path: stream_name.clone(),
                    message: e.to_string(),
                }))
            }
        };
        match parse(k + 1, &line) {
            Ok(None) => None,
            Err(e) => Some(Err(with_path(e, &stream_name))),
            Ok(Some((t, v))) => {
                let step = t - last_time;
                last_time = t;
                if (step - dt).abs() > 0.01 * dt {
                    Some(Err(RecordingError::Line {
                        path: stream_name.clone(),
                        line: k + 1,
                        message: format!(
                            "time step {step:e} s differs from the recording's {dt:e} s: samples must be evenly spaced"
                        ),
                    }))
                } else {
                    Some(Ok(v))
                }
            }
        }
    });
    Ok(Samples {
        sample_rate: rate,
        description: format!("CSV, {rate:.0} samples per second"),
        full_scale_fractions: false,
        expected_len: None,
        inner: Box::new(first_values.into_iter().map(Ok).chain(rest)),
    })
}
