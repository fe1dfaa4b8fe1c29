//! `dbtrail ports`: the serial ports on this machine, with USB details where known.

use anyhow::Context;
use serialport::SerialPortType;

use super::{emit, Failure, Runtime};

pub fn run() -> Result<(), Failure> {
    let ports = serialport::available_ports()
        .context("cannot list serial ports")
        .runtime()?;
    if ports.is_empty() {
        return emit("no serial ports found; plug the detector in, or try `dbtrail sim --pty` for a simulated one\n");
    }
    let mut text = String::new();
    for port in ports {
        let kind = match &port.port_type {
            SerialPortType::UsbPort(usb) => {
                let mut line = format!("USB {:04x}:{:04x}", usb.vid, usb.pid);
                for (label, value) in [
                    ("maker", &usb.manufacturer),
                    ("product", &usb.product),
                    ("serial", &usb.serial_number),
                ] {
                    if let Some(value) = value {
                        line.push_str(&format!(", {label} {value}"));
                    }
                }
                line
            }
            SerialPortType::PciPort => "PCI".into(),
            SerialPortType::BluetoothPort => "Bluetooth".into(),
            SerialPortType::Unknown => "other".into(),
        };
        text.push_str(&format!("{}  {kind}\n", port.port_name));
    }
    emit(&text)
}
