//! The memory a run may use, read from the machine: the budget every
//! front end checks a case's memory estimate against before a solve.

/// The memory a run may use: QHEAT_MEMORY_LIMIT_BYTES when set (a budget
/// override), else MemAvailable from /proc/meminfo (Linux, or MemTotal
/// where the kernel gives no MemAvailable); `None` elsewhere.
pub fn available_memory_bytes() -> Option<u64> {
    if let Ok(v) = std::env::var("QHEAT_MEMORY_LIMIT_BYTES")
        && let Ok(n) = v.parse::<u64>()
    {
        return Some(n);
    }
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let field = |name: &str| {
        text.lines()
            .find(|l| l.starts_with(name))
            .and_then(|l| l.split_whitespace().nth(1))
            .and_then(|kb| kb.parse::<u64>().ok())
            .map(|kb| kb * 1024)
    };
    field("MemAvailable:").or_else(|| field("MemTotal:"))
}
