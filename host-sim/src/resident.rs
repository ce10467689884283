//! The program's own peak resident memory: `VmHWM` of `/proc/self/status` on Linux (the
//! most physical memory the process has held at once, since it started); not available
//! elsewhere. `process` prints it at the end and writes it into `summary.json`. This module
//! imports nothing of the crate, so any folder may use it.
//!
//! ```
//! use sweepgate_host::resident::{peak_resident_bytes, peak_text};
//! if cfg!(target_os = "linux") {
//!     assert!(peak_resident_bytes().unwrap() > 0);
//!     assert!(peak_text().ends_with("MiB (VmHWM)"));
//! }
//! ```

/// The process's peak resident memory in bytes (`VmHWM`), `None` where the system does not
/// say (not Linux, no `/proc`).
pub fn peak_resident_bytes() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    parse_vm_hwm(&status)
}

/// `VmHWM` of a `/proc/PID/status` text, bytes (the kernel writes it in kB, 1024 bytes).
pub fn parse_vm_hwm(status: &str) -> Option<u64> {
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let mut words = line["VmHWM:".len()..].split_whitespace();
    let n: u64 = words.next()?.parse().ok()?;
    match words.next() {
        Some("kB") => Some(n * 1024),
        _ => None,
    }
}

/// The peak in words: `12.3 MiB (VmHWM)`, or `not available`.
pub fn peak_text() -> String {
    match peak_resident_bytes() {
        Some(b) => format!("{:.1} MiB (VmHWM)", b as f64 / (1024.0 * 1024.0)),
        None => "not available".to_string(),
    }
}

/// `peak_resident_bytes` and `peak_resident` for `summary.json`: the peak, and where it
/// was read (`when`), or `null` and `"not available"`.
pub fn peak_json(when: &str) -> serde_json::Value {
    let peak = peak_resident_bytes();
    serde_json::json!({
        "peak_resident_bytes": peak,
        "peak_resident": peak.map_or("not available".to_string(), |_| {
            format!("VmHWM of /proc/self/status, read {when}")
        }),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_kernel_line_is_read_in_kib() {
        let text = "Name:\tsweepgate\nVmPeak:\t  100 kB\nVmHWM:\t    2048 kB\nVmRSS:\t 1 kB\n";
        assert_eq!(parse_vm_hwm(text), Some(2048 * 1024));
        assert_eq!(parse_vm_hwm("VmRSS:\t1 kB\n"), None);
        assert_eq!(
            parse_vm_hwm("VmHWM:\t12 MB\n"),
            None,
            "only the kernel's unit"
        );
    }
}
