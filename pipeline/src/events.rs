//! Reading list-mode events and spectra into a [`stages::raw::Accumulator`]: Parquet one
//! row group at a time and Arrow IPC one record batch at a time (only the mapped columns
//! are decoded, so memory follows the row group or batch, not the file), CSV streamed line
//! by line. Spectra are small and read whole.

use std::collections::HashMap;
use std::fs::File;
use std::io::{BufRead, BufReader};
use std::path::Path;

use polars::prelude::*;
use stages::raw::{Accumulator, RawPlan, RawResult, UNKNOWN_DETECTOR};

use crate::tables::TableError;

/// The file formats, by extension.
const ACCEPTED: &str = ".parquet (or .pq), .arrow (or .ipc, .feather), .csv";

/// Rows handed to the accumulator at once from CSV.
const CSV_BATCH: usize = 1 << 16;

/// Why an event or spectrum file could not be read. The messages leave out the path: the
/// caller's diagnostic names the file; they name the line, row or column inside it.
#[derive(Debug, thiserror::Error)]
pub enum RawFileError {
    /// The file cannot be opened, or its reader rejects it (as for any table file).
    #[error(transparent)]
    File(#[from] TableError),
    /// A row group that cannot be read.
    #[error("cannot read rows {start}..{end}: {source}")]
    Rows {
        /// First row (0-based).
        start: usize,
        /// One past the last row.
        end: usize,
        /// The reader's error.
        source: PolarsError,
    },
    /// An extension that names no format of this kind of file.
    #[error("unknown {kind}file format `.{extension}`; accepted: {ACCEPTED}")]
    UnknownFormat {
        /// `event `, `spectrum ` or empty.
        kind: &'static str,
        /// The extension found (lower case).
        extension: String,
    },
    /// Columns mapped in `raw.columns` that the file lacks.
    #[error(
        "column{} {} not found (mapped in raw.columns); columns found: {}",
        if .missing.len() > 1 { "s" } else { "" },
        .missing.iter().map(|m| format!("`{m}`")).collect::<Vec<_>>().join(", "),
        .found.join(", ")
    )]
    MissingColumns {
        /// The mapped columns not found.
        missing: Vec<String>,
        /// The columns the file has.
        found: Vec<String>,
    },
    /// A column of a type its role cannot use.
    #[error("column `{column}` has type {dtype}; expected {expected}")]
    ColumnType {
        /// The column.
        column: String,
        /// Its type.
        dtype: String,
        /// What the role needs.
        expected: String,
    },
    /// A CSV line that cannot be read.
    #[error("line {line}: cannot read it: {source}")]
    Line {
        /// The line (1-based).
        line: u64,
        /// The I/O error.
        source: std::io::Error,
    },
    /// A CSV line that ends inside a quoted value.
    #[error(
        "line {line}, column {column}: found the quote of `\"{value}` not closed on its line; expected one \
         event a line: add the closing `\"`"
    )]
    OpenQuote {
        /// The line (1-based).
        line: u64,
        /// The column's name in backquotes, or its number.
        column: String,
        /// The value from its opening quote to the end of the line.
        value: String,
    },
    /// A CSV line with more or fewer values than the header.
    #[error(
        "line {line}: found {found} values, expected {} as in the header ({}); quote a value that holds a \
         comma (\"a,b\")",
        .header.len(),
        .header.join(", ")
    )]
    ValueCount {
        /// The line (1-based).
        line: u64,
        /// Values found.
        found: usize,
        /// The header's column names.
        header: Vec<String>,
    },
    /// A CSV value that is not UTF-8.
    #[error("line {line}, column {column}: found `{value}`, expected UTF-8 text")]
    NotUtf8 {
        /// The line (1-based).
        line: u64,
        /// The column's name in backquotes, or its number.
        column: String,
        /// The value, with the bytes that are not UTF-8 replaced.
        value: String,
    },
    /// A spectrum row the accumulator refuses.
    #[error("data row {row}: {reason}")]
    SpectrumRow {
        /// Data row (1-based).
        row: usize,
        /// Why.
        reason: Box<dyn std::error::Error + Send + Sync>,
    },
    /// The table library failed.
    #[error(transparent)]
    Polars(#[from] PolarsError),
}

/// A file that cannot be opened.
fn open_error(e: std::io::Error) -> RawFileError {
    TableError::Open(e).into()
}

/// A file the Parquet reader rejects.
fn parquet_error(source: PolarsError) -> RawFileError {
    TableError::Decode { format: "Parquet", source }.into()
}

/// A file the Arrow IPC reader rejects.
fn ipc_error(source: PolarsError) -> RawFileError {
    TableError::Decode { format: "Arrow IPC", source }.into()
}

/// Which columns of an event or spectrum file, by role.
struct Roles<'a> {
    detector: &'a str,
    /// ADC channel (events) or channel (spectra).
    value: &'a str,
    delta_e: Option<&'a str>,
    pile_up: Option<&'a str>,
    time: Option<&'a str>,
    /// Counts per channel (spectra).
    counts: Option<&'a str>,
}

impl<'a> Roles<'a> {
    fn events(plan: &'a RawPlan) -> Self {
        let c = &plan.config.columns;
        Roles {
            detector: &c.detector,
            value: &c.energy,
            delta_e: c.delta_e.as_deref(),
            pile_up: c.pile_up.as_deref(),
            time: c.time.as_deref(),
            counts: None,
        }
    }

    fn spectra(plan: &'a RawPlan) -> Self {
        let s = &plan.config.spectrum_columns;
        Roles {
            detector: &s.detector,
            value: &s.channel,
            delta_e: None,
            pile_up: None,
            time: None,
            counts: Some(&s.counts),
        }
    }

    fn names(&self) -> Vec<String> {
        [Some(self.detector), Some(self.value), self.delta_e, self.pile_up, self.time, self.counts]
            .into_iter()
            .flatten()
            .map(str::to_string)
            .collect()
    }
}

fn extension(path: &Path) -> String {
    path.extension().and_then(|e| e.to_str()).unwrap_or("").to_ascii_lowercase()
}

/// Detector values → detector indices, cached.
struct DetectorMap<'a> {
    plan: &'a RawPlan,
    cache: HashMap<String, u16>,
    small: Vec<u16>,
}

impl<'a> DetectorMap<'a> {
    fn new(plan: &'a RawPlan) -> Self {
        // Integer ids 0…65535 by table: only the values that name a detector (as written in
        // `detector_ids`, or as a detector id) need a lookup.
        let mut small = vec![UNKNOWN_DETECTOR; usize::from(u16::MAX) + 1];
        let ids = plan.detector_ids();
        let keys = ids.iter().copied().chain(plan.config.detector_ids.keys().map(String::as_str));
        for key in keys {
            if let Ok(v) = key.parse::<u16>() {
                // Only the canonical text of the number ("7", not "07") is that number.
                if v.to_string() == key {
                    small[usize::from(v)] = plan.detector_index(key);
                }
            }
        }
        DetectorMap { plan, cache: HashMap::new(), small }
    }
    fn text(&mut self, v: &str) -> u16 {
        if let Some(i) = self.cache.get(v) {
            return *i;
        }
        let i = self.plan.detector_index(v);
        self.cache.insert(v.to_string(), i);
        i
    }
    fn column(&mut self, c: &Column) -> Result<Vec<u16>, RawFileError> {
        let s = c.as_materialized_series();
        match s.dtype() {
            // The common case, one table lookup per event.
            DataType::UInt16 => {
                let mut out = Vec::with_capacity(s.len());
                for a in s.u16()?.downcast_iter() {
                    if a.validity().is_none_or(|v| v.unset_bits() == 0) {
                        out.extend(a.values().iter().map(|v| self.small[usize::from(*v)]));
                    } else {
                        out.extend(a.iter().map(|v| v.map_or(UNKNOWN_DETECTOR, |v| self.small[usize::from(*v)])));
                    }
                }
                Ok(out)
            }
            DataType::String => Ok(s.str()?.iter().map(|v| v.map_or(UNKNOWN_DETECTOR, |v| self.text(v))).collect()),
            dt if dt.is_integer() => {
                let v = s.cast(&DataType::Int64)?;
                Ok(v.i64()?
                    .iter()
                    .map(|v| match v {
                        Some(v) if (0..=i64::from(u16::MAX)).contains(&v) => self.small[v as usize],
                        Some(v) => self.text(&v.to_string()),
                        None => UNKNOWN_DETECTOR,
                    })
                    .collect())
            }
            dt => Err(RawFileError::ColumnType {
                column: c.name().to_string(),
                dtype: dt.to_string(),
                expected: "integers or strings (detector ids)".into(),
            }),
        }
    }
}

fn f64_column(c: &Column, what: &str) -> Result<Vec<f64>, RawFileError> {
    let s = c.as_materialized_series();
    if !(s.dtype().is_primitive_numeric() || s.dtype() == &DataType::Boolean) {
        return Err(RawFileError::ColumnType {
            column: c.name().to_string(),
            dtype: s.dtype().to_string(),
            expected: format!("numbers ({what})"),
        });
    }
    let v = s.cast(&DataType::Float64)?;
    Ok(v.f64()?.iter().map(|x| x.unwrap_or(f64::NAN)).collect())
}

/// Feed one table of events (a row group, or a whole IPC file) to the accumulator.
fn add_frame(
    acc: &mut Accumulator<'_>,
    map: &mut DetectorMap<'_>,
    df: &DataFrame,
    roles: &Roles<'_>,
) -> Result<(), RawFileError> {
    let col = |name: &str| df.column(name);
    let det = map.column(col(roles.detector)?)?;
    let pile: Option<Vec<bool>> = roles
        .pile_up
        .map(|p| f64_column(col(p)?, "a pile-up flag").map(|v| v.iter().map(|x| *x != 0.0 && !x.is_nan()).collect()))
        .transpose()?;
    let de = roles.delta_e.map(|p| f64_column(col(p)?, "ΔE")).transpose()?;
    let energy = col(roles.value)?.as_materialized_series();
    if energy.dtype() == &DataType::UInt16 && energy.null_count() == 0 {
        let ca = energy.u16()?;
        let mut offset = 0;
        for chunk in ca.downcast_iter() {
            let values = chunk.values().as_slice();
            let n = values.len();
            acc.add_u16(
                &det[offset..offset + n],
                values,
                pile.as_deref().map(|p| &p[offset..offset + n]),
                de.as_deref().map(|d| &d[offset..offset + n]),
            );
            offset += n;
        }
        return Ok(());
    }
    let energy = f64_column(col(roles.value)?, "ADC channels")?;
    acc.add_f64(&det, &energy, pile.as_deref(), de.as_deref());
    Ok(())
}

fn check_columns(found: &[String], roles: &Roles<'_>) -> Result<(), RawFileError> {
    let missing: Vec<String> = roles.names().into_iter().filter(|n| !found.contains(n)).collect();
    if missing.is_empty() {
        Ok(())
    } else {
        Err(RawFileError::MissingColumns { missing, found: found.to_vec() })
    }
}

fn read_parquet(
    path: &Path,
    acc: &mut Accumulator<'_>,
    map: &mut DetectorMap<'_>,
    roles: &Roles<'_>,
) -> Result<(), RawFileError> {
    let open = || File::open(path).map_err(open_error);
    let mut reader = ParquetReader::new(open()?);
    let schema = reader.schema().map_err(parquet_error)?;
    let found: Vec<String> = schema.iter_names().map(|n| n.to_string()).collect();
    check_columns(&found, roles)?;
    let meta = reader.get_metadata().map_err(parquet_error)?.clone();
    // One thread decodes row group k + 1 while this one accumulates row group k; at most
    // two decoded row groups exist at a time, so memory follows the row-group size.
    let (send, receive) = std::sync::mpsc::sync_channel::<Result<DataFrame, RawFileError>>(1);
    let names = roles.names();
    std::thread::scope(|scope| {
        scope.spawn(move || {
            let mut offset = 0;
            for rg in &meta.row_groups {
                let n = rg.num_rows();
                let frame = open().and_then(|f| {
                    let mut r = ParquetReader::new(f);
                    r.set_metadata(meta.clone());
                    r.with_columns(Some(names.clone()))
                        .with_slice(Some((offset, n)))
                        .finish()
                        .map_err(|source| RawFileError::Rows { start: offset, end: offset + n, source })
                });
                let failed = frame.is_err();
                if send.send(frame).is_err() || failed {
                    return;
                }
                offset += n;
            }
        });
        for frame in receive {
            add_frame(acc, map, &frame?, roles)?;
        }
        Ok(())
    })
}

fn ipc_columns(path: &Path) -> Result<Vec<String>, RawFileError> {
    let file = File::open(path).map_err(open_error)?;
    let mut reader = IpcReader::new(file);
    let schema = reader.schema().map_err(ipc_error)?;
    Ok(schema.iter_names().map(|n| n.to_string()).collect())
}

/// Feed an Arrow IPC file to the accumulator one record batch at a time, decoding only
/// the mapped columns.
fn read_ipc_events(
    path: &Path,
    acc: &mut Accumulator<'_>,
    map: &mut DetectorMap<'_>,
    roles: &Roles<'_>,
) -> Result<(), RawFileError> {
    use polars_arrow::io::ipc::read::{read_file_metadata, FileReader};
    let mut file = File::open(path).map_err(open_error)?;
    let meta = read_file_metadata(&mut file).map_err(ipc_error)?;
    let found: Vec<String> = meta.schema.iter_names().map(|n| n.to_string()).collect();
    check_columns(&found, roles)?;
    let wanted = roles.names();
    let mut projection: Vec<usize> =
        found.iter().enumerate().filter(|(_, n)| wanted.contains(n)).map(|(i, _)| i).collect();
    projection.sort_unstable();
    let names: Vec<String> = projection.iter().map(|&i| found[i].clone()).collect();
    for batch in FileReader::new(file, meta, Some(projection), None) {
        let batch = batch.map_err(ipc_error)?;
        let columns = names
            .iter()
            .zip(batch.into_arrays())
            .map(|(n, a)| Series::from_arrow(n.as_str().into(), a).map(Column::from))
            .collect::<Result<Vec<Column>, _>>()?;
        let df = DataFrame::new_infer_height(columns)?;
        add_frame(acc, map, &df, roles)?;
    }
    Ok(())
}

fn read_ipc_columns(path: &Path, columns: Vec<String>) -> Result<DataFrame, RawFileError> {
    let file = File::open(path).map_err(open_error)?;
    IpcReader::new(file).with_columns(Some(columns)).finish().map_err(ipc_error)
}

/// A CSV file read one line at a time, each line parsed by `csv-core` (the `csv` crate's
/// RFC 4180 parser: quoted values, doubled quotes) into one reused record, so memory does
/// not grow with the file. An event is one line, so every error names its line of the file.
struct CsvRecords {
    /// The header's column names (line 1), trimmed; empty for an empty file.
    header: Vec<String>,
    input: BufReader<File>,
    parser: csv_core::Reader,
    /// The line last read, ending in `\n`, and its number in the file (1-based).
    text: Vec<u8>,
    line: u64,
    /// The values of the line last read, unquoted, one after another, and where each ends.
    values: Vec<u8>,
    ends: Vec<usize>,
    /// How many values the line last read holds.
    len: usize,
}

impl CsvRecords {
    /// Open a CSV file and read its header.
    fn open(path: &Path) -> Result<Self, RawFileError> {
        let file = File::open(path).map_err(open_error)?;
        let mut csv = CsvRecords {
            header: Vec::new(),
            input: BufReader::new(file),
            parser: csv_core::ReaderBuilder::new().terminator(csv_core::Terminator::Any(b'\n')).build(),
            text: Vec::new(),
            line: 0,
            values: vec![0; 1024],
            ends: vec![0; 16],
            len: 0,
        };
        if csv.read()? {
            csv.header = (0..csv.len).map(|i| csv.text(i).map(|h| h.trim().to_string())).collect::<Result<_, _>>()?;
        }
        Ok(csv)
    }

    /// Read and parse the next line that is not blank; `false` at the end of the file.
    fn read(&mut self) -> Result<bool, RawFileError> {
        loop {
            self.text.clear();
            let n = self
                .input
                .read_until(b'\n', &mut self.text)
                .map_err(|source| RawFileError::Line { line: self.line + 1, source })?;
            if n == 0 {
                return Ok(false);
            }
            self.line += 1;
            if self.text.trim_ascii().is_empty() {
                continue;
            }
            // One terminator, `\n`, also for the last line and for lines ending in `\r\n`.
            if self.text.ends_with(b"\r\n") {
                self.text.truncate(self.text.len() - 2);
            } else if self.text.ends_with(b"\n") {
                self.text.pop();
            }
            self.text.push(b'\n');
            return self.parse().map(|()| true);
        }
    }

    /// Parse the line last read into its values.
    fn parse(&mut self) -> Result<(), RawFileError> {
        use csv_core::ReadRecordResult;
        let (mut nin, mut nout, mut nend) = (0, 0, 0);
        loop {
            let (result, i, o, e) =
                self.parser.read_record(&self.text[nin..], &mut self.values[nout..], &mut self.ends[nend..]);
            (nin, nout, nend) = (nin + i, nout + o, nend + e);
            match result {
                ReadRecordResult::Record => {
                    self.len = nend;
                    return Ok(());
                }
                ReadRecordResult::OutputFull => self.values.resize(2 * self.values.len(), 0),
                ReadRecordResult::OutputEndsFull => self.ends.resize(2 * self.ends.len(), 0),
                // The line ended inside a quoted value.
                ReadRecordResult::InputEmpty | ReadRecordResult::End => {
                    let start = if nend == 0 { 0 } else { self.ends[nend - 1] };
                    let open = String::from_utf8_lossy(&self.values[start..nout]);
                    return Err(RawFileError::OpenQuote {
                        line: self.line,
                        column: self.column(nend),
                        value: open.trim_end().to_string(),
                    });
                }
            }
        }
    }

    /// Read the next event: a line with one value for each header column; `false` at the
    /// end of the file.
    fn next_event(&mut self) -> Result<bool, RawFileError> {
        let more = self.read()?;
        if more && self.len != self.header.len() {
            return Err(RawFileError::ValueCount { line: self.line, found: self.len, header: self.header.clone() });
        }
        Ok(more)
    }

    /// Column `i` for a message: its name, or its number where the header has none.
    fn column(&self, i: usize) -> String {
        self.header.get(i).map_or_else(|| (i + 1).to_string(), |h| format!("`{h}`"))
    }

    /// Value `i` of the line last read, as text.
    fn text(&self, i: usize) -> Result<&str, RawFileError> {
        let start = i.checked_sub(1).and_then(|j| self.ends.get(j)).copied().unwrap_or(0);
        let end = if i < self.len { self.ends.get(i).copied().unwrap_or(start) } else { start };
        let bytes = self.values.get(start..end).unwrap_or_default();
        std::str::from_utf8(bytes).map_err(|_| RawFileError::NotUtf8 {
            line: self.line,
            column: self.column(i),
            value: String::from_utf8_lossy(bytes).into_owned(),
        })
    }
}

fn read_csv_events(
    path: &Path,
    acc: &mut Accumulator<'_>,
    map: &mut DetectorMap<'_>,
    roles: &Roles<'_>,
) -> Result<(), RawFileError> {
    let mut csv = CsvRecords::open(path)?;
    if csv.header.is_empty() {
        return Ok(());
    }
    check_columns(&csv.header, roles)?;
    let index = |name: &str| csv.header.iter().position(|h| h == name).unwrap_or(0);
    let (i_det, i_e) = (index(roles.detector), index(roles.value));
    let (i_de, i_pu) = (roles.delta_e.map(index), roles.pile_up.map(index));
    let (mut det, mut e, mut de, mut pu) = (Vec::new(), Vec::new(), Vec::new(), Vec::new());
    let num = |s: &str| s.trim().parse::<f64>().unwrap_or(f64::NAN);
    let flush =
        |det: &mut Vec<u16>, e: &mut Vec<f64>, de: &mut Vec<f64>, pu: &mut Vec<bool>, acc: &mut Accumulator<'_>| {
            acc.add_f64(det, e, i_pu.map(|_| pu.as_slice()), i_de.map(|_| de.as_slice()));
            det.clear();
            e.clear();
            de.clear();
            pu.clear();
        };
    while csv.next_event()? {
        det.push(map.text(csv.text(i_det)?.trim()));
        e.push(num(csv.text(i_e)?));
        if let Some(i) = i_de {
            de.push(num(csv.text(i)?));
        }
        if let Some(i) = i_pu {
            let v = csv.text(i)?.trim();
            pu.push(!(v.is_empty() || v == "0" || v.eq_ignore_ascii_case("false")));
        }
        if det.len() == CSV_BATCH {
            flush(&mut det, &mut e, &mut de, &mut pu, acc);
        }
    }
    flush(&mut det, &mut e, &mut de, &mut pu, acc);
    Ok(())
}

/// Check that an event or spectrum file has the mapped columns, reading only its schema
/// (or header line).
///
/// # Errors
/// An unreadable file, an unknown format, or the missing columns (the columns found named).
pub fn check_file(path: &Path, plan: &RawPlan, spectra: bool) -> Result<(), RawFileError> {
    let roles = if spectra { Roles::spectra(plan) } else { Roles::events(plan) };
    let found = match extension(path).as_str() {
        "parquet" | "pq" => {
            let mut reader = ParquetReader::new(File::open(path).map_err(open_error)?);
            let schema = reader.schema().map_err(parquet_error)?;
            schema.iter_names().map(|n| n.to_string()).collect()
        }
        "arrow" | "ipc" | "feather" => ipc_columns(path)?,
        "csv" => CsvRecords::open(path)?.header,
        ext => return Err(RawFileError::UnknownFormat { kind: "", extension: ext.to_string() }),
    };
    check_columns(&found, &roles)
}

/// Reduce a list-mode event file to yields, tallies and spectra.
///
/// # Errors
/// An unreadable, corrupt or truncated file, a mapped column that is missing (the columns
/// found are named) or of the wrong type.
pub fn reduce_events(path: &Path, plan: &RawPlan) -> Result<RawResult, RawFileError> {
    let roles = Roles::events(plan);
    let mut acc = plan.accumulator();
    let mut map = DetectorMap::new(plan);
    match extension(path).as_str() {
        "parquet" | "pq" => read_parquet(path, &mut acc, &mut map, &roles)?,
        "arrow" | "ipc" | "feather" => read_ipc_events(path, &mut acc, &mut map, &roles)?,
        "csv" => read_csv_events(path, &mut acc, &mut map, &roles)?,
        ext => return Err(RawFileError::UnknownFormat { kind: "event ", extension: ext.to_string() }),
    }
    Ok(acc.finish())
}

/// Reduce a spectrum file (detector, channel, counts per row) to yields, tallies and spectra.
///
/// # Errors
/// As [`reduce_events`], and a count that is not a whole number ≥ 0 (its row is named).
pub fn reduce_spectra(path: &Path, plan: &RawPlan) -> Result<RawResult, RawFileError> {
    let c = &plan.config.spectrum_columns;
    let roles = Roles::spectra(plan);
    let df = match extension(path).as_str() {
        "parquet" | "pq" | "csv" => crate::tables::read_table(path)?,
        "arrow" | "ipc" | "feather" => {
            check_columns(&ipc_columns(path)?, &roles)?;
            read_ipc_columns(path, roles.names())?
        }
        ext => return Err(RawFileError::UnknownFormat { kind: "spectrum ", extension: ext.to_string() }),
    };
    let found: Vec<String> = df.get_column_names().iter().map(|n| n.to_string()).collect();
    check_columns(&found, &roles)?;
    let mut map = DetectorMap::new(plan);
    let det = map.column(df.column(&c.detector)?)?;
    let ch = f64_column(df.column(&c.channel)?, "channels")?;
    let n = f64_column(df.column(&c.counts)?, "counts")?;
    let mut acc = plan.accumulator();
    for i in 0..det.len() {
        acc.add_spectrum_row(det[i], ch[i], n[i])
            .map_err(|reason| RawFileError::SpectrumRow { row: i + 1, reason: reason.into() })?;
    }
    Ok(acc.finish())
}
