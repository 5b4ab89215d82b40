//! CSV recordings: a time column and a voltage column, evenly spaced.

use super::*;

/// The first line that is neither blank nor a comment, with its 1-based number; `None` for a
/// file with no such line.
fn read_header(
    lines: &mut impl Iterator<Item = (usize, std::io::Result<String>)>,
) -> std::io::Result<Option<(usize, String)>> {
    for (k, line) in lines {
        let line = line?;
        let trimmed = line.trim();
        if !trimmed.is_empty() && !trimmed.starts_with('#') {
            return Ok(Some((k + 1, line)));
        }
    }
    Ok(None)
}

/// A field's text without surrounding spaces and quotes.
fn clean(s: &str) -> String {
    s.trim().trim_matches('"').trim().to_string()
}

/// How a data row is split: the separator and the two columns read.
#[derive(Clone, Copy)]
struct Row {
    separator: char,
    time: usize,
    voltage: usize,
}

impl Row {
    /// Line `k` (1-based) as (time, voltage); `None` for a blank or comment line. The error
    /// carries no path (the caller adds it).
    fn parse(self, k: usize, line: &str) -> Result<Option<(f64, f64)>, RecordingError> {
        let trimmed = line.trim();
        if trimmed.is_empty() || trimmed.starts_with('#') {
            return Ok(None);
        }
        let fields: Vec<String> = trimmed.split(self.separator).map(clean).collect();
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
        Ok(Some((
            get(self.time, "time")?,
            get(self.voltage, "voltage")?,
        )))
    }
}

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
    // Lines as text, whatever their encoding: a comment or header in Latin-1 (an
    // instrument's degree sign or umlaut) must not stop the reading; a byte that is not
    // UTF-8 becomes U+FFFD, and a sample line is judged on its fields.
    let mut lines = BufReader::new(file)
        .split(b'\n')
        .map(|line| {
            line.map(|bytes| {
                let text = String::from_utf8_lossy(&bytes);
                text.strip_suffix('\r').unwrap_or(&text).to_string()
            })
        })
        .enumerate();
    let line_error = |line: usize, message: String| RecordingError::Line {
        path: name.clone(),
        line,
        message,
    };
    let (header_line, header) =
        read_header(&mut lines)
            .map_err(io)?
            .ok_or_else(|| RecordingError::Format {
                path: name.clone(),
                message: "the file is empty".into(),
            })?;
    let separator = if header.contains(';') && !header.contains(',') {
        ';'
    } else {
        ','
    };
    let names: Vec<String> = header.split(separator).map(clean).collect();
    let column = |wanted: &str| {
        names
            .iter()
            .position(|n| n.eq_ignore_ascii_case(wanted))
            .ok_or_else(|| {
                line_error(
                    header_line,
                    format!("no column `{wanted}` (columns: {})", names.join(", ")),
                )
            })
    };
    let row = Row {
        separator,
        time: column(&columns.time)?,
        voltage: column(&columns.voltage)?,
    };
    let parse = move |k: usize, line: &str| row.parse(k, line);
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
