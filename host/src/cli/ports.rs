//! `gleaner ports`: list serial ports.

use anyhow::Result;
use clap::Args;

use crate::link::list_ports;

/// List every serial port with its type and, for USB, vendor and product ids
/// and serial number, so you can tell which one is the node.
#[derive(Debug, Args)]
pub struct Cmd {
    /// Print JSON instead of a table.
    #[arg(long)]
    pub json: bool,
}

impl Cmd {
    /// Runs the command.
    pub fn run(self) -> Result<()> {
        let ports = list_ports()?;
        if self.json {
            say!("{}", serde_json::to_string_pretty(&ports)?)?;
            return Ok(());
        }
        if ports.is_empty() {
            say!("no serial ports found: plug the node in (and check `dmesg` on Linux), or try `gleaner demo` to run a virtual node")?;
            return Ok(());
        }
        let config = crate::user_config::UserConfig::load()?;
        say!(
            "{:<24} {:<9} {:<9} {:<20} description",
            "port",
            "type",
            "vid:pid",
            "serial"
        )?;
        let mut stable = Vec::new();
        for p in &ports {
            let ids = match (&p.vid, &p.pid) {
                (Some(v), Some(d)) => format!("{v}:{d}"),
                _ => "-".into(),
            };
            let desc = [p.manufacturer.as_deref(), p.product.as_deref()]
                .into_iter()
                .flatten()
                .collect::<Vec<_>>()
                .join(" ");
            say!(
                "{:<24} {:<9} {:<9} {:<20} {}",
                p.name,
                p.kind,
                ids,
                p.serial_number.as_deref().unwrap_or("-"),
                desc
            )?;
            if let Some(name) = &p.stable_name {
                stable.push((p.name.as_str(), name.as_str()));
            }
        }
        if stable.is_empty() {
            return Ok(());
        }
        say!("\nNames that stay the same when the device is replugged (use these, or name them):")?;
        for (port, name) in stable {
            match config.alias_of(name).or(config.alias_of(port)) {
                Some(alias) => say!("  {port}: {name} (your name: {alias})")?,
                None => say!("  {port}: {name}")?,
            }
        }
        match crate::user_config::config_path() {
            Some(path) => say!(
                "Name a port under [ports] in {}: my-node = \"/dev/serial/by-id/...\"",
                path.display()
            )?,
            None => say!("Name a port with GLEANER_CONFIG=FILE and [ports] in it")?,
        }
        Ok(())
    }
}
