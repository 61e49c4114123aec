//! What the report ran on: CPU model, cores, memory, date.

/// The machine, as the report states it.
pub struct Machine {
    /// CPU model name.
    pub cpu: String,
    /// Logical CPUs the OS reports.
    pub cpus: usize,
    /// Total memory (GiB).
    pub memory_gib: f64,
    /// Date of the run (UTC, YYYY-MM-DD).
    pub date: String,
}

impl Machine {
    /// One line: "CPU, N logical CPUs, M GiB".
    pub fn one_line(&self) -> String {
        format!(
            "{}, {} logical CPUs, {:.0} GiB",
            self.cpu, self.cpus, self.memory_gib
        )
    }

    /// Short form for a table cell: "CPU, N CPUs".
    pub fn short(&self) -> String {
        format!("{}, {} CPUs", self.cpu, self.cpus)
    }
}

/// Reads /proc/cpuinfo, /proc/meminfo and the clock.
pub fn describe() -> Machine {
    let cpuinfo = std::fs::read_to_string("/proc/cpuinfo").unwrap_or_default();
    let cpu = cpuinfo
        .lines()
        .find(|l| l.starts_with("model name"))
        .and_then(|l| l.split(':').nth(1))
        .map(|s| s.trim().to_string())
        .unwrap_or_else(|| "unknown CPU".to_string());
    let cpus = std::thread::available_parallelism().map_or(1, |n| n.get());
    let meminfo = std::fs::read_to_string("/proc/meminfo").unwrap_or_default();
    let memory_gib = meminfo
        .lines()
        .find(|l| l.starts_with("MemTotal:"))
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|kb| kb.parse::<f64>().ok())
        .map_or(0.0, |kb| kb / (1024.0 * 1024.0));
    Machine {
        cpu,
        cpus,
        memory_gib,
        date: today(),
    }
}

/// Today's date (UTC) from the system clock: days since 1970 to a civil date (H. Hinnant's
/// days-from-civil algorithm, inverted; written here to avoid a date crate for one line).
fn today() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_secs());
    let z = (secs / 86_400) as i64 + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!("{y:04}-{m:02}-{d:02}")
}
