//! The kinds of failure a script can tell apart by the exit code, carried
//! with the error: `result.failed_as(Failure::PortUnavailable)` keeps the
//! message as it was and marks the kind.

/// A failure with an exit code of its own (any other failure exits with 1).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Failure {
    /// The command line is wrong (also clap's own parse errors): exit 2.
    Usage,
    /// The serial port is missing, busy or forbidden: exit 3.
    PortUnavailable,
    /// The node did not answer a command in time: exit 4.
    NoAnswer,
    /// The node refused a command (a configuration, say): exit 5.
    Refused,
    /// An input file is not what it should be (not a log, an invalid
    /// settings or scenario file): exit 6.
    BadInput,
}

impl Failure {
    /// Every kind, in exit-code order.
    pub const ALL: [Failure; 5] = [
        Failure::Usage,
        Failure::PortUnavailable,
        Failure::NoAnswer,
        Failure::Refused,
        Failure::BadInput,
    ];

    /// The process exit code.
    pub const fn code(self) -> u8 {
        match self {
            Failure::Usage => 2,
            Failure::PortUnavailable => 3,
            Failure::NoAnswer => 4,
            Failure::Refused => 5,
            Failure::BadInput => 6,
        }
    }

    /// The exit code for `err`: the kind it was marked with, else the kind
    /// a typed error in it implies, else 1.
    pub fn exit_code(err: &anyhow::Error) -> u8 {
        err.chain()
            .find_map(|cause| cause.downcast_ref::<Classified>().map(|c| c.kind))
            .or_else(|| err.chain().find_map(Failure::implied_by))
            .map_or(1, Failure::code)
    }

    /// The kind a typed library error stands for, whoever passed it on: the
    /// one place that maps the library's errors to exit codes.
    fn implied_by(cause: &(dyn std::error::Error + 'static)) -> Option<Failure> {
        if let Some(e) = cause.downcast_ref::<crate::log::LogError>() {
            return e.is_bad_input().then_some(Failure::BadInput);
        }
        if let Some(e) = cause.downcast_ref::<crate::sim::scenarios::scenario::ScenarioError>() {
            return e.in_a_file().then_some(Failure::BadInput);
        }
        None
    }

    /// The typed error `E` somewhere in `err` (marked with a kind or not):
    /// what callers and tests match on instead of the message's words.
    pub fn find<E: std::error::Error + Send + Sync + 'static>(err: &anyhow::Error) -> Option<&E> {
        err.chain().find_map(|cause| {
            cause.downcast_ref::<E>().or_else(|| {
                cause
                    .downcast_ref::<Classified>()
                    .and_then(|c| Failure::find::<E>(&c.inner))
            })
        })
    }
}

/// An error (with its causes) and the kind of failure it is.
#[derive(Debug)]
pub struct Classified {
    /// The kind.
    pub kind: Failure,
    inner: anyhow::Error,
}

impl std::fmt::Display for Classified {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        // The whole chain as one message, as the error read before it was marked.
        write!(f, "{:#}", self.inner)
    }
}

impl std::error::Error for Classified {}

/// Marks an error, or the error of a result, with its kind of failure.
pub trait FailedAs: Sized {
    /// The same, marked as `kind` (the message is unchanged).
    fn failed_as(self, kind: Failure) -> Self;
}

impl FailedAs for anyhow::Error {
    fn failed_as(self, kind: Failure) -> Self {
        anyhow::Error::new(Classified { kind, inner: self })
    }
}

impl<T> FailedAs for anyhow::Result<T> {
    fn failed_as(self, kind: Failure) -> Self {
        self.map_err(|e| e.failed_as(kind))
    }
}

impl std::fmt::Display for Failure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Failure::Usage => "usage",
            Failure::PortUnavailable => "port unavailable",
            Failure::NoAnswer => "no answer",
            Failure::Refused => "refused",
            Failure::BadInput => "bad input",
        })
    }
}

impl std::error::Error for Failure {}

#[cfg(test)]
mod tests {
    use super::*;
    use anyhow::Context;

    #[test]
    fn the_kind_travels_with_the_error_and_gives_distinct_codes() {
        let err = Err::<(), _>(anyhow::anyhow!("serial port /dev/x not found"))
            .failed_as(Failure::PortUnavailable)
            .context("while recording")
            .unwrap_err();
        assert_eq!(Failure::exit_code(&err), 3);
        assert_eq!(
            format!("{err:#}"),
            "while recording: serial port /dev/x not found"
        );
        assert_eq!(Failure::exit_code(&anyhow::anyhow!("other")), 1);
        // A typed error is found under the mark and the context.
        let typed = anyhow::Error::new(std::io::Error::other("disk on fire"))
            .failed_as(Failure::BadInput)
            .context("while exporting");
        assert_eq!(
            Failure::find::<std::io::Error>(&typed).map(|e| e.kind()),
            Some(std::io::ErrorKind::Other)
        );
        assert!(Failure::find::<std::fmt::Error>(&typed).is_none());
        // A typed error implies its kind unmarked, under any context.
        let not_a_log = anyhow::Error::new(crate::log::LogError::NotALog { name: "x".into() })
            .context("while exporting");
        assert_eq!(Failure::exit_code(&not_a_log), Failure::BadInput.code());
        let failing_disk = anyhow::Error::new(crate::log::LogError::Unreadable {
            name: "x".into(),
            offset: 7,
            source: std::io::Error::other("EIO"),
        });
        assert_eq!(Failure::exit_code(&failing_disk), 1);
        assert_eq!(format!("{typed:#}"), "while exporting: disk on fire");
        let codes: std::collections::BTreeSet<u8> = Failure::ALL.iter().map(|f| f.code()).collect();
        assert_eq!(codes.len(), Failure::ALL.len());
        assert!(!codes.contains(&0) && !codes.contains(&1));
    }
}
