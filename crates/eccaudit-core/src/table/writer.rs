//! Writers of velocity tables: CSV text that the reader reads back to the same table.

#[cfg(doc)]
use super::parse_table;
use super::{TimeConvention, TimeScale, VelocityTable};

/// Header cell naming a time convention so that [`parse_table`] reads it back.
pub(super) fn time_header(convention: &TimeConvention) -> String {
    let Some(offset) = convention.offset_days else {
        return "time".to_string();
    };
    let name = match convention.scale {
        TimeScale::Jd => "jd",
        TimeScale::Bjd => "bjd",
        TimeScale::Hjd => "hjd",
        TimeScale::Unstated if offset == 0.0 => return "time".to_string(),
        TimeScale::Unstated => return format!("time [offset:{offset}]"),
    };
    if offset == 0.0 {
        format!("time [{name}]")
    } else {
        format!("time [{name}-{offset}]")
    }
}

/// Write a table as CSV text (header with time convention and `m/s`, values
/// at full precision) that [`parse_table`] reads back to the same table. A
/// full Julian date of unstated scale, or an unknown origin, is written as a
/// plain `time` column and inferred again on reading.
pub fn write_table_csv(table: &VelocityTable) -> String {
    let mut writer = csv::WriterBuilder::new().from_writer(Vec::new());
    let mut text_rows: Vec<Vec<String>> = vec![vec![
        time_header(&table.time_convention),
        "rv [m/s]".to_string(),
        "uncertainty [m/s]".to_string(),
        "instrument".to_string(),
    ]];
    for row_index in 0..table.n_rows() {
        text_rows.push(vec![
            table.times[row_index].to_string(),
            table.velocities[row_index].to_string(),
            table.uncertainties[row_index].to_string(),
            table.instrument_names[table.instrument_index[row_index]].clone(),
        ]);
    }
    for text_row in &text_rows {
        // Writing to a Vec cannot fail.
        writer
            .write_record(text_row)
            .expect("writing CSV to memory");
    }
    let bytes = writer.into_inner().expect("flushing CSV to memory");
    String::from_utf8(bytes).expect("CSV of UTF-8 strings is UTF-8")
}
