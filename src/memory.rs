//! The process's own memory use, for summaries and benchmarks.
//!
//! On Linux the kernel keeps the high-water mark of resident memory in
//! `/proc/self/status` (`VmHWM`, in kB); elsewhere nothing is reported.

/// Peak resident memory of this process so far, bytes; `None` where the
/// operating system does not tell.
pub fn peak_resident_bytes() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    parse_vm_hwm(&status)
}

/// The `VmHWM:` line of a `/proc/<pid>/status` text, in bytes.
fn parse_vm_hwm(status: &str) -> Option<u64> {
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: u64 = line
        .trim_start_matches("VmHWM:")
        .trim()
        .trim_end_matches("kB")
        .trim()
        .parse()
        .ok()?;
    Some(kb * 1024)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_the_high_water_mark() {
        // Format of proc(5): "VmHWM:\t   12345 kB".
        let text = "Name:\tx\nVmPeak:\t  999 kB\nVmHWM:\t   12345 kB\nVmRSS:\t 100 kB\n";
        assert_eq!(parse_vm_hwm(text), Some(12345 * 1024));
        assert_eq!(parse_vm_hwm("Name:\tx\n"), None);
        if cfg!(target_os = "linux") {
            assert!(peak_resident_bytes().unwrap() > 0);
        }
    }
}
