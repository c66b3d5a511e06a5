//! The user's own defaults: a TOML file in the platform's configuration
//! folder (`$XDG_CONFIG_HOME/gleaner/config.toml` or
//! `~/.config/gleaner/config.toml` on Linux) with a line rate, a runs folder
//! and names for ports.
//!
//! Every value is looked up in one order: the command-line flag, then its
//! environment variable, then this file, then the built-in default. Clap reads
//! the first two (its `env` support); [`UserConfig`] adds the last two.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use serde::Deserialize;

use crate::failure::{FailedAs, Failure};
use crate::link::DEFAULT_BAUD;

/// Environment variable naming the configuration file to read instead of the
/// platform's (also how tests keep the user's own file out of the way).
pub const CONFIG_ENV: &str = "GLEANER_CONFIG";
/// Environment variable for the node's port (a path or an alias).
pub const PORT_ENV: &str = "GLEANER_PORT";
/// Environment variable for the line rate.
pub const BAUD_ENV: &str = "GLEANER_BAUD";
/// Environment variable for the folder new logs go to.
pub const RUNS_DIR_ENV: &str = "GLEANER_RUNS_DIR";
/// The runs folder when nothing else names one.
pub const DEFAULT_RUNS_DIR: &str = "gleaner-runs";

/// The contents of the configuration file; every key is optional.
#[derive(Debug, Clone, Default, PartialEq, Eq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct UserConfig {
    /// Line rate used when no flag or environment variable gives one.
    pub baud: Option<u32>,
    /// Folder for new logs when no flag or environment variable gives one.
    pub runs_dir: Option<PathBuf>,
    /// Port names: `greenhouse-3 = "/dev/serial/by-id/usb-..."`, usable
    /// wherever a port is asked for.
    #[serde(default)]
    pub ports: BTreeMap<String, String>,
}

/// Where the configuration file is: `$GLEANER_CONFIG` if set, else
/// `gleaner/config.toml` in the platform's configuration folder.
pub fn config_path() -> Option<PathBuf> {
    if let Some(path) = std::env::var_os(CONFIG_ENV) {
        return Some(PathBuf::from(path));
    }
    dirs::config_dir().map(|dir| dir.join("gleaner").join("config.toml"))
}

impl UserConfig {
    /// Reads the user's file; no file (or no configuration folder) is an
    /// empty configuration, a file that does not parse is an error naming it.
    pub fn load() -> Result<Self> {
        match config_path() {
            Some(path) => Self::load_from(&path),
            None => Ok(Self::default()),
        }
    }

    /// Reads `path`; a missing file is an empty configuration.
    pub fn load_from(path: &Path) -> Result<Self> {
        let text = match std::fs::read_to_string(path) {
            Ok(text) => text,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Self::default()),
            Err(e) => {
                return Err(anyhow::Error::new(e)
                    .context(format!("cannot read configuration {}", path.display())))
                .failed_as(Failure::BadInput)
            }
        };
        Self::from_toml(&text)
            .with_context(|| format!("in configuration {}", path.display()))
            .failed_as(Failure::BadInput)
    }

    /// Parses and checks a configuration's text.
    pub fn from_toml(text: &str) -> Result<Self> {
        let config: Self = toml::from_str(text)?;
        if config.baud == Some(0) {
            anyhow::bail!("baud must be a line rate above 0");
        }
        if let Some((name, _)) = config
            .ports
            .iter()
            .find(|(name, path)| name.trim().is_empty() || path.trim().is_empty())
        {
            anyhow::bail!("port name '{name}' needs a non-empty name and path");
        }
        Ok(config)
    }

    /// The port to open for `given` (an alias from `[ports]`, or a path as is).
    pub fn port(&self, given: &str) -> String {
        self.ports
            .get(given)
            .cloned()
            .unwrap_or_else(|| given.to_owned())
    }

    /// The line rate: the flag's or environment's `given`, else the file's,
    /// else the default.
    pub fn baud(&self, given: Option<u32>) -> u32 {
        given.or(self.baud).unwrap_or(DEFAULT_BAUD)
    }

    /// The runs folder: `given` (flag or environment), else the file's, else
    /// `gleaner-runs` in the working folder.
    pub fn runs_dir(&self, given: Option<PathBuf>) -> PathBuf {
        given
            .or_else(|| self.runs_dir.clone())
            .unwrap_or_else(|| PathBuf::from(DEFAULT_RUNS_DIR))
    }

    /// The alias under which `path` is known, if any.
    pub fn alias_of(&self, path: &str) -> Option<&str> {
        self.ports
            .iter()
            .find(|(_, p)| p.as_str() == path)
            .map(|(name, _)| name.as_str())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const EXAMPLE: &str = r#"
baud = 57600
runs_dir = "/srv/gleaner"

[ports]
greenhouse-3 = "/dev/serial/by-id/usb-Invented_Node_0001-if00"
"#;

    #[test]
    fn flag_or_environment_beats_file_beats_default() {
        let file = UserConfig::from_toml(EXAMPLE).unwrap();
        let empty = UserConfig::default();
        assert_eq!(file.baud(Some(9600)), 9600);
        assert_eq!(file.baud(None), 57_600);
        assert_eq!(empty.baud(None), DEFAULT_BAUD);
        assert_eq!(file.runs_dir(Some("here".into())), PathBuf::from("here"));
        assert_eq!(file.runs_dir(None), PathBuf::from("/srv/gleaner"));
        assert_eq!(empty.runs_dir(None), PathBuf::from(DEFAULT_RUNS_DIR));
    }

    #[test]
    fn aliases_name_ports_and_paths_pass_through() {
        let file = UserConfig::from_toml(EXAMPLE).unwrap();
        let path = "/dev/serial/by-id/usb-Invented_Node_0001-if00";
        assert_eq!(file.port("greenhouse-3"), path);
        assert_eq!(file.port("/dev/ttyACM0"), "/dev/ttyACM0");
        assert_eq!(file.alias_of(path), Some("greenhouse-3"));
    }

    #[test]
    fn bad_files_are_refused_with_the_reason() {
        assert!(UserConfig::from_toml("baud = 0").is_err());
        let typo = UserConfig::from_toml("bawd = 9600").unwrap_err();
        assert!(format!("{typo:#}").contains("bawd"), "{typo:#}");
        assert!(UserConfig::from_toml("[ports]\nx = \"\"").is_err());
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("config.toml");
        std::fs::write(&path, "baud = \"fast\"").unwrap();
        let err = UserConfig::load_from(&path).unwrap_err();
        assert!(format!("{err:#}").contains("config.toml"), "{err:#}");
        assert_eq!(
            UserConfig::load_from(&dir.path().join("none.toml")).unwrap(),
            UserConfig::default()
        );
    }
}
