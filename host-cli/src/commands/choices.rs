//! The library's fixed-choice option types as command-line values: their names and help
//! lines, so the library types carry no command-line code.

use clap::builder::PossibleValue;
use clap::ValueEnum;

use crate::mqtt::options::PayloadKind;
use crate::precision::Precision;
use crate::replay::InputFormat;

impl ValueEnum for Precision {
    fn value_variants<'a>() -> &'a [Self] {
        &[Precision::F32, Precision::F64]
    }

    fn to_possible_value(&self) -> Option<PossibleValue> {
        Some(match self {
            Precision::F32 => {
                PossibleValue::new("f32").help("Single precision, as on a Cortex-M4F board")
            }
            Precision::F64 => PossibleValue::new("f64").help("Double precision"),
        })
    }
}

impl ValueEnum for InputFormat {
    fn value_variants<'a>() -> &'a [Self] {
        &[
            InputFormat::Auto,
            InputFormat::Csv,
            InputFormat::DeviceLog,
            InputFormat::Parquet,
        ]
    }

    fn to_possible_value(&self) -> Option<PossibleValue> {
        Some(match self {
            InputFormat::Auto => PossibleValue::new("auto").help(
                "Decide by content: a device log starts with a 0x00 byte, a Parquet file with PAR1, a CSV feed with neither",
            ),
            InputFormat::Csv => PossibleValue::new("csv").help("CSV with a header"),
            InputFormat::DeviceLog => PossibleValue::new("device-log")
                .help("A device log (COBS-framed postcard records, see `steadycal_core::record`)"),
            InputFormat::Parquet => PossibleValue::new("parquet")
                .help("A Parquet file, read one row group at a time"),
        })
    }
}

impl ValueEnum for PayloadKind {
    fn value_variants<'a>() -> &'a [Self] {
        &[PayloadKind::Json, PayloadKind::Csv]
    }

    fn to_possible_value(&self) -> Option<PossibleValue> {
        Some(match self {
            PayloadKind::Json => PossibleValue::new("json")
                .help("One JSON object per message: t, raw, optional ref, temp, channel"),
            PayloadKind::Csv => {
                PossibleValue::new("csv").help("One CSV line per message under --columns")
            }
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_match_the_summary_names() {
        for precision in Precision::value_variants() {
            let name = precision
                .to_possible_value()
                .unwrap()
                .get_name()
                .to_string();
            assert_eq!(serde_json::json!(precision), serde_json::json!(name));
        }
        for format in InputFormat::value_variants() {
            let name = format.to_possible_value().unwrap().get_name().to_string();
            assert_eq!(serde_json::json!(format), serde_json::json!(name));
        }
    }
}
