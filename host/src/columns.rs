//! The columns of exported tables, declared once: name (with its unit as the
//! suffix), type and how to read it from a message. The CSV export, the
//! Parquet dataset's schema and rows, the live JSON stream and the docs'
//! column tables are all produced from these lists.

use gleaner_protocol::{ChannelStats, Event, LoadEvent, Report};

/// A column's type.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// A whole number in the node's own units.
    Int,
    /// A whole number that may be missing (a forecast with nothing in sight).
    MaybeInt,
    /// A name (a state, a cause).
    Text,
    /// True or false.
    Flag,
}

/// One cell of a row.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Cell {
    /// A number.
    Int(i64),
    /// A number that is not there.
    Missing,
    /// A name.
    Text(&'static str),
    /// True or false.
    Flag(bool),
}

/// A column of the table of messages of type `T`.
pub struct Column<T> {
    /// The column's name; integers end in their unit (`_uv`, `_na`, `_nj`, `_ms`, `_nw`).
    pub name: &'static str,
    /// Its type.
    pub kind: Kind,
    /// Its value in a message.
    pub cell: fn(&T) -> Cell,
}

// By hand: a derive would ask `T: Copy`, and the messages are not.
impl<T> Clone for Column<T> {
    fn clone(&self) -> Self {
        *self
    }
}

impl<T> Copy for Column<T> {}

fn int(v: impl Into<i64>) -> Cell {
    Cell::Int(v.into())
}

/// A `u64` the node counts in (never near `i64::MAX` in practice; saturates).
fn wide(v: u64) -> Cell {
    Cell::Int(i64::try_from(v).unwrap_or(i64::MAX))
}

fn maybe(v: Option<u32>) -> Cell {
    v.map_or(Cell::Missing, int)
}

/// The min / mean / max columns of one channel.
macro_rules! channel {
    ($field:ident, $min:literal, $mean:literal, $max:literal) => {
        [
            Column {
                name: $min,
                kind: Kind::Int,
                cell: |r: &Report| int(ChannelStats::min(&r.$field)),
            },
            Column {
                name: $mean,
                kind: Kind::Int,
                cell: |r: &Report| int(r.$field.mean),
            },
            Column {
                name: $max,
                kind: Kind::Int,
                cell: |r: &Report| int(ChannelStats::max(&r.$field)),
            },
        ]
    };
}

const INPUT_UV: [Column<Report>; 3] =
    channel!(input_uv, "input_uv_min", "input_uv_mean", "input_uv_max");
const INPUT_NA: [Column<Report>; 3] =
    channel!(input_na, "input_na_min", "input_na_mean", "input_na_max");
const OUTPUT_UV: [Column<Report>; 3] = channel!(
    output_uv,
    "output_uv_min",
    "output_uv_mean",
    "output_uv_max"
);
const OUTPUT_NA: [Column<Report>; 3] = channel!(
    output_na,
    "output_na_min",
    "output_na_mean",
    "output_na_max"
);

/// The columns of a report.
pub const REPORT: [Column<Report>; 31] = [
    Column {
        name: "interval_ms",
        kind: Kind::Int,
        cell: |r| int(r.interval_ms),
    },
    Column {
        name: "sample_count",
        kind: Kind::Int,
        cell: |r| int(r.sample_count),
    },
    INPUT_UV[0],
    INPUT_UV[1],
    INPUT_UV[2],
    INPUT_NA[0],
    INPUT_NA[1],
    INPUT_NA[2],
    OUTPUT_UV[0],
    OUTPUT_UV[1],
    OUTPUT_UV[2],
    OUTPUT_NA[0],
    OUTPUT_NA[1],
    OUTPUT_NA[2],
    Column {
        name: "drawn_nj",
        kind: Kind::Int,
        cell: |r| wide(r.drawn_nj),
    },
    Column {
        name: "delivered_nj",
        kind: Kind::Int,
        cell: |r| wide(r.delivered_nj),
    },
    Column {
        name: "stored_nj",
        kind: Kind::Int,
        cell: |r| int(r.stored_nj),
    },
    Column {
        name: "state",
        kind: Kind::Text,
        cell: |r| Cell::Text(r.state.name()),
    },
    Column {
        name: "idle_ms",
        kind: Kind::Int,
        cell: |r| int(r.state_ms.idle_ms),
    },
    Column {
        name: "cold_start_ms",
        kind: Kind::Int,
        cell: |r| int(r.state_ms.cold_start_ms),
    },
    Column {
        name: "harvesting_ms",
        kind: Kind::Int,
        cell: |r| int(r.state_ms.harvesting_ms),
    },
    Column {
        name: "sagging_ms",
        kind: Kind::Int,
        cell: |r| int(r.state_ms.sagging_ms),
    },
    Column {
        name: "cutoff_ms",
        kind: Kind::Int,
        cell: |r| int(r.state_ms.cutoff_ms),
    },
    Column {
        name: "stalled_ms",
        kind: Kind::Int,
        cell: |r| int(r.state_ms.stalled_ms),
    },
    Column {
        name: "input_cutoff_in_ms",
        kind: Kind::MaybeInt,
        cell: |r| maybe(r.input_cutoff_in_ms),
    },
    Column {
        name: "brownout_in_ms",
        kind: Kind::MaybeInt,
        cell: |r| maybe(r.brownout_in_ms),
    },
    Column {
        name: "load_nw",
        kind: Kind::Int,
        cell: |r| wide(r.load_nw),
    },
    Column {
        name: "net_nw",
        kind: Kind::Int,
        cell: |r| int(r.net_nw),
    },
    Column {
        name: "load_powered",
        kind: Kind::Flag,
        cell: |r| Cell::Flag(r.load_powered),
    },
    Column {
        name: "load_shed",
        kind: Kind::Flag,
        cell: |r| Cell::Flag(r.load_shed),
    },
    Column {
        name: "flags",
        kind: Kind::Int,
        cell: |r| int(r.flags.0),
    },
];

/// The columns of a state transition.
pub const EVENT: [Column<Event>; 7] = [
    Column {
        name: "from_state",
        kind: Kind::Text,
        cell: |e| Cell::Text(e.from.name()),
    },
    Column {
        name: "to_state",
        kind: Kind::Text,
        cell: |e| Cell::Text(e.to.name()),
    },
    Column {
        name: "cause",
        kind: Kind::Text,
        cell: |e| Cell::Text(e.cause.name()),
    },
    Column {
        name: "trigger_input_uv",
        kind: Kind::Int,
        cell: |e| int(e.trigger_input_uv),
    },
    Column {
        name: "trigger_output_uv",
        kind: Kind::Int,
        cell: |e| int(e.trigger_output_uv),
    },
    Column {
        name: "input_uv",
        kind: Kind::Int,
        cell: |e| int(e.input_uv),
    },
    Column {
        name: "output_uv",
        kind: Kind::Int,
        cell: |e| int(e.output_uv),
    },
];

/// The columns of a load event (the load losing or regaining its supply).
pub const LOAD: [Column<LoadEvent>; 7] = [
    Column {
        name: "powered",
        kind: Kind::Flag,
        cell: |e| Cell::Flag(e.powered),
    },
    Column {
        name: "cause",
        kind: Kind::Text,
        cell: |e| Cell::Text(e.cause.name()),
    },
    Column {
        name: "output_uv",
        kind: Kind::Int,
        cell: |e| int(e.output_uv),
    },
    Column {
        name: "input_uv",
        kind: Kind::Int,
        cell: |e| int(e.input_uv),
    },
    Column {
        name: "converter_state",
        kind: Kind::Text,
        cell: |e| Cell::Text(e.converter.name()),
    },
    Column {
        name: "converter_state_ms",
        kind: Kind::Int,
        cell: |e| int(e.converter_state_ms),
    },
    Column {
        name: "net_nw",
        kind: Kind::Int,
        cell: |e| int(e.net_nw),
    },
];

/// The CSV export keeps the names its events file had before the dataset
/// existed (`from`, `to`: reserved words in SQL, so the dataset renamed them).
pub fn csv_name(name: &'static str) -> &'static str {
    match name {
        "from_state" => "from",
        "to_state" => "to",
        other => other,
    }
}

/// The names of `columns`, joined by commas, as the CSV header has them.
pub fn csv_header<T>(columns: &[Column<T>]) -> String {
    columns
        .iter()
        .map(|c| csv_name(c.name))
        .collect::<Vec<_>>()
        .join(",")
}

/// Writes the cells of `message` as CSV fields, each preceded by a comma.
pub fn write_csv_cells<T>(
    out: &mut dyn std::io::Write,
    columns: &[Column<T>],
    message: &T,
) -> std::io::Result<()> {
    for column in columns {
        match (column.cell)(message) {
            Cell::Int(v) => write!(out, ",{v}")?,
            Cell::Missing => out.write_all(b",")?,
            Cell::Text(t) => write!(out, ",{t}")?,
            Cell::Flag(f) => write!(out, ",{}", u8::from(f))?,
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_unique_and_integers_carry_their_unit() {
        fn check<T>(columns: &[Column<T>]) {
            let mut names: Vec<&str> = columns.iter().map(|c| c.name).collect();
            names.sort_unstable();
            names.dedup();
            assert_eq!(names.len(), columns.len());
            for c in columns
                .iter()
                .filter(|c| matches!(c.kind, Kind::Int | Kind::MaybeInt))
            {
                let counted = ["sample_count", "flags"].contains(&c.name);
                assert!(
                    counted || crate::dataset::unit_of(c.name).is_some(),
                    "{} has no unit",
                    c.name
                );
            }
        }
        check(&REPORT);
        check(&EVENT);
        check(&LOAD);
    }

    #[test]
    fn the_dataset_page_names_every_column_and_no_other() {
        let page = include_str!("../../docs/dataset.md");
        let section = |from: &str, to: &str| {
            let start = page
                .find(from)
                .unwrap_or_else(|| panic!("{from} in the page"));
            let end = page[start..].find(to).map_or(page.len(), |e| start + e);
            page[start..end].to_owned()
        };
        let named = |text: &str| -> Vec<String> {
            text.split('`')
                .skip(1)
                .step_by(2)
                .filter(|w| w.chars().all(|c| c.is_ascii_lowercase() || c == '_'))
                .map(str::to_owned)
                .collect()
        };
        let check = |text: String, names: Vec<&str>, values: &[&str]| {
            let said = named(&text);
            for name in &names {
                assert!(said.iter().any(|s| s == name), "{name} is not on the page");
            }
            for word in &said {
                assert!(
                    names.contains(&word.as_str()) || values.contains(&word.as_str()),
                    "the page names {word}, which is no column"
                );
            }
        };
        let states = [
            "reports",
            "idle",
            "harvesting",
            "sagging",
            "cutoff",
            "stalled",
        ];
        check(
            section("`reports`, one row", "`events`, one row"),
            REPORT.iter().map(|c| c.name).collect(),
            &states,
        );
        check(
            section("`events`, one row", "`loads`, one row"),
            EVENT.iter().map(|c| c.name).collect(),
            &["events"],
        );
        check(
            section("`loads`, one row", "These lists"),
            LOAD.iter().map(|c| c.name).collect(),
            &["loads"],
        );
    }
}
