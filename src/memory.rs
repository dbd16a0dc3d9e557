//! The process's own memory use, for summaries and benchmarks, and the
//! memory the system has available.
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
    parse_kb_line(status, "VmHWM:")
}

/// Memory the system reports available for new work, bytes (`MemAvailable`
/// of `/proc/meminfo`); `None` where it does not tell.
pub fn available_bytes() -> Option<u64> {
    let meminfo = std::fs::read_to_string("/proc/meminfo").ok()?;
    parse_kb_line(&meminfo, "MemAvailable:")
}

/// The `key` line of a `/proc` text given in kB, in bytes.
fn parse_kb_line(text: &str, key: &str) -> Option<u64> {
    let line = text.lines().find(|l| l.starts_with(key))?;
    let kb: u64 = line
        .trim_start_matches(key)
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
    fn reads_the_available_memory() {
        // Format of proc(5): "MemAvailable:   12345 kB".
        let text = "MemTotal:       99999 kB\nMemAvailable:   12345 kB\n";
        assert_eq!(parse_kb_line(text, "MemAvailable:"), Some(12345 * 1024));
        if cfg!(target_os = "linux") {
            assert!(available_bytes().unwrap() > 0);
        }
    }

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
