//! Serial ports: listing and opening, with clear errors.

use std::time::Duration;

use crate::failure::FailedAs;
use anyhow::{anyhow, Result};
use serde::Serialize;
use serialport::{SerialPort, SerialPortType};

/// The node's default line rate.
pub const DEFAULT_BAUD: u32 = 115_200;

/// One serial port as the operating system reports it.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct PortInfo {
    /// Path or name to open.
    pub name: String,
    /// "usb", "pci", "bluetooth" or "unknown".
    pub kind: String,
    /// USB vendor id, hex.
    pub vid: Option<String>,
    /// USB product id, hex.
    pub pid: Option<String>,
    /// USB serial number.
    pub serial_number: Option<String>,
    /// USB manufacturer.
    pub manufacturer: Option<String>,
    /// USB product name.
    pub product: Option<String>,
    /// A name for the same device that survives replugging
    /// (`/dev/serial/by-id/...` on Linux), when there is one.
    pub stable_name: Option<String>,
}

/// Folder of links named after each USB serial device's identity (Linux).
const STABLE_NAMES_DIR: &str = "/dev/serial/by-id";

/// The link in `dir` that points at the device `port`, if any.
pub fn stable_name_in(dir: &std::path::Path, port: &str) -> Option<String> {
    let device = std::fs::canonicalize(port).ok()?;
    std::fs::read_dir(dir)
        .ok()?
        .flatten()
        .map(|entry| entry.path())
        .find(|link| std::fs::canonicalize(link).is_ok_and(|target| target == device))
        .map(|link| link.to_string_lossy().into_owned())
}

/// Every serial port the operating system knows.
pub fn list_ports() -> Result<Vec<PortInfo>> {
    let ports =
        serialport::available_ports().map_err(|e| anyhow!("cannot list serial ports: {e}"))?;
    Ok(ports
        .into_iter()
        .map(|p| {
            let stable_name = stable_name_in(std::path::Path::new(STABLE_NAMES_DIR), &p.port_name);
            let mut info = PortInfo {
                name: p.port_name,
                kind: "unknown".into(),
                vid: None,
                pid: None,
                serial_number: None,
                manufacturer: None,
                product: None,
                stable_name,
            };
            match p.port_type {
                SerialPortType::UsbPort(usb) => {
                    info.kind = "usb".into();
                    info.vid = Some(format!("{:04x}", usb.vid));
                    info.pid = Some(format!("{:04x}", usb.pid));
                    info.serial_number = usb.serial_number;
                    info.manufacturer = usb.manufacturer;
                    info.product = usb.product;
                }
                SerialPortType::PciPort => info.kind = "pci".into(),
                SerialPortType::BluetoothPort => info.kind = "bluetooth".into(),
                SerialPortType::Unknown => {}
            }
            info
        })
        .collect())
}

/// Why a serial port could not be opened, each with what to do about it.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum PortError {
    /// The device is not there (or went away).
    #[error("serial port {port} does not exist or went away ({detail}); run `gleaner ports` to see the ports present, and check the cable")]
    NoDevice {
        /// The port asked for.
        port: String,
        /// What the system said.
        detail: String,
    },
    /// No such path.
    #[error("serial port {port} not found; run `gleaner ports` to see the ports present")]
    NotFound {
        /// The port asked for.
        port: String,
    },
    /// The user may not open it.
    #[error("{}", permission_hint(port))]
    Forbidden {
        /// The port asked for.
        port: String,
    },
    /// Another program has it open.
    #[error("serial port {port} is in use by another program (a serial monitor, another gleaner, a modem manager); close it and try again")]
    Busy {
        /// The port asked for.
        port: String,
    },
    /// Anything else the system said.
    #[error("cannot open serial port {port}: {detail}")]
    Other {
        /// The port asked for.
        port: String,
        /// What the system said.
        detail: String,
    },
}

/// Turns an open failure into one that says what to do.
pub fn explain_open_error(port: &str, err: &serialport::Error) -> PortError {
    use serialport::ErrorKind;
    let text = err.to_string();
    let lower = text.to_lowercase();
    let port = port.to_string();
    match err.kind() {
        ErrorKind::NoDevice => PortError::NoDevice { port, detail: text },
        ErrorKind::Io(std::io::ErrorKind::NotFound) => PortError::NotFound { port },
        ErrorKind::Io(std::io::ErrorKind::PermissionDenied) => PortError::Forbidden { port },
        _ if lower.contains("permission denied") => PortError::Forbidden { port },
        _ if lower.contains("busy") || lower.contains("resource temporarily unavailable") => {
            PortError::Busy { port }
        }
        _ => PortError::Other { port, detail: text },
    }
}

fn permission_hint(port: &str) -> String {
    if cfg!(target_os = "linux") {
        format!(
            "permission denied opening {port}: on Linux, add yourself to the group that owns it (usually `dialout`: `sudo usermod -aG dialout $USER`), then log out and in again"
        )
    } else {
        format!("permission denied opening {port}: check that your user may use serial devices")
    }
}

/// Opens `port` at `baud` (8N1, no flow control) with a short read timeout.
pub fn open_port(port: &str, baud: u32) -> Result<Box<dyn SerialPort>> {
    serialport::new(port, baud)
        .timeout(Duration::from_millis(50))
        .open()
        .map_err(|e| {
            anyhow::Error::new(explain_open_error(port, &e))
                .failed_as(crate::failure::Failure::PortUnavailable)
        })
}

/// True for a serial read or write that only has to be tried again (a
/// timeout with nothing to move, a full buffer, a signal), not a lost port.
pub fn try_again(err: &std::io::Error) -> bool {
    matches!(
        err.kind(),
        std::io::ErrorKind::TimedOut
            | std::io::ErrorKind::WouldBlock
            | std::io::ErrorKind::Interrupted
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_missing_port_says_how_to_find_the_right_one() {
        let err = open_port("/dev/gleaner-no-such-port", DEFAULT_BAUD)
            .err()
            .unwrap();
        assert_eq!(
            crate::failure::Failure::exit_code(&err),
            crate::failure::Failure::PortUnavailable.code()
        );
        let typed = crate::failure::Failure::find::<PortError>(&err);
        assert!(
            matches!(typed, Some(PortError::NoDevice { port, .. } | PortError::NotFound { port }) if port == "/dev/gleaner-no-such-port"),
            "{typed:?}"
        );
        assert!(err.to_string().contains("gleaner ports"), "{err}");
    }

    #[test]
    fn permission_errors_name_the_group() {
        let err = serialport::Error::new(
            serialport::ErrorKind::Io(std::io::ErrorKind::PermissionDenied),
            "Permission denied",
        );
        let typed = explain_open_error("/dev/ttyACM0", &err);
        assert!(matches!(&typed, PortError::Forbidden { port } if port == "/dev/ttyACM0"));
        let msg = typed.to_string();
        if cfg!(target_os = "linux") {
            assert!(msg.contains("dialout"), "{msg}");
        }
    }

    #[cfg(unix)]
    #[test]
    fn the_stable_name_is_the_link_pointing_at_the_device() {
        let devices = tempfile::tempdir().unwrap();
        let dir = tempfile::tempdir().unwrap();
        let device = devices.path().join("ttyACM7");
        std::fs::write(&device, "").unwrap();
        let link = dir.path().join("usb-Invented_Node_0001-if00");
        std::os::unix::fs::symlink(&device, &link).unwrap();
        let other = devices.path().join("ttyACM8");
        std::fs::write(&other, "").unwrap();
        assert_eq!(
            stable_name_in(dir.path(), device.to_str().unwrap()),
            Some(link.to_string_lossy().into_owned())
        );
        assert_eq!(stable_name_in(dir.path(), other.to_str().unwrap()), None);
    }

    #[test]
    fn busy_ports_are_named_as_busy() {
        let err = serialport::Error::new(serialport::ErrorKind::Unknown, "Device or resource busy");
        let typed = explain_open_error("/dev/ttyUSB0", &err);
        assert!(matches!(typed, PortError::Busy { .. }), "{typed:?}");
        assert!(typed.to_string().contains("in use"));
    }
}
