//! The memory budget for stored tables, and giving freed memory back to the system.

/// Budget when nothing else is known: 8 GiB.
const FALLBACK_BUDGET: u64 = 8 << 30;

/// The default budget: half of the machine's memory (`MemTotal` in `/proc/meminfo`), so
/// that the tables of one daemon leave room for analyses, plots and everything else;
/// 8 GiB where that file does not exist.
pub fn default_budget() -> u64 {
    std::fs::read_to_string("/proc/meminfo")
        .ok()
        .and_then(|text| mem_total_bytes(&text))
        .map(|total| total / 2)
        .unwrap_or(FALLBACK_BUDGET)
}

fn mem_total_bytes(meminfo: &str) -> Option<u64> {
    let line = meminfo.lines().find(|l| l.starts_with("MemTotal:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib * 1024)
}

/// Parses a size such as `4GiB`, `512MiB`, `2GB`, `1.5G` or `1000000` (bytes). Binary units
/// (`KiB`, `MiB`, `GiB`, `TiB`, and the bare `K`, `M`, `G`, `T`) count in 1024s, decimal
/// ones (`kB`, `MB`, `GB`, `TB`) in 1000s, following IEC 80000-13.
pub fn parse_size(text: &str) -> Result<u64, String> {
    let trimmed = text.trim();
    let split = trimmed
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .unwrap_or(trimmed.len());
    let (number, unit) = trimmed.split_at(split);
    let value: f64 = number
        .parse()
        .map_err(|_| format!("`{text}` is not a size; write for example 4GiB, 512MiB or 1000000 (bytes)"))?;
    let factor: u64 = match unit.trim().to_ascii_lowercase().as_str() {
        "" | "b" => 1,
        "k" | "kib" => 1 << 10,
        "m" | "mib" => 1 << 20,
        "g" | "gib" => 1 << 30,
        "t" | "tib" => 1 << 40,
        "kb" => 1_000,
        "mb" => 1_000_000,
        "gb" => 1_000_000_000,
        "tb" => 1_000_000_000_000,
        other => {
            return Err(format!(
                "`{other}` is not a size unit; use B, KiB, MiB, GiB, TiB (or kB, MB, GB, TB)"
            ))
        }
    };
    let bytes = value * factor as f64;
    if !bytes.is_finite() || bytes < 1.0 || bytes > u64::MAX as f64 {
        return Err(format!(
            "`{text}` is not a usable memory budget; give at least one byte"
        ));
    }
    Ok(bytes as u64)
}

/// Drops `freed` and then, with `trim`, gives the allocator's unused memory back to the
/// system, on a thread of its own: unmapping a replaced table and trimming the heap cost a
/// few percent of an import, and nothing the caller answers depends on them. The bytes were
/// already released from the budget by the caller. Falls back to doing both here if no
/// thread can be started.
pub fn free_in_background<T: Send + 'static>(freed: T, trim: bool) {
    let mut freed = Some(freed);
    let spawned = std::thread::Builder::new().name("mobilis-free".into()).spawn({
        let freed = freed.take();
        move || {
            drop(freed);
            if trim {
                return_freed_memory();
            }
        }
    });
    if spawned.is_err() {
        drop(freed);
        if trim {
            return_freed_memory();
        }
    }
}

/// Gives memory that the allocator holds but no longer uses back to the system. glibc's
/// malloc keeps freed memory in its arenas; `malloc_trim(0)` releases what it can (glibc
/// manual, "Memory allocation tunables" / malloc_trim(3)). Elsewhere this does nothing.
pub fn return_freed_memory() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    {
        extern "C" {
            fn malloc_trim(pad: usize) -> std::os::raw::c_int;
        }
        // SAFETY: malloc_trim has no preconditions; it only walks the allocator's own arenas.
        unsafe {
            malloc_trim(0);
        }
    }
}

/// Formats bytes for a message a person reads: `1.50 GiB`.
pub fn human_bytes(bytes: u64) -> String {
    const UNITS: [&str; 5] = ["B", "KiB", "MiB", "GiB", "TiB"];
    let mut value = bytes as f64;
    let mut unit = 0;
    while value >= 1024.0 && unit + 1 < UNITS.len() {
        value /= 1024.0;
        unit += 1;
    }
    if unit == 0 {
        format!("{bytes} B")
    } else {
        format!("{value:.2} {}", UNITS[unit])
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sizes_parse_in_binary_and_decimal_units() {
        assert_eq!(parse_size("4GiB").unwrap(), 4 << 30);
        assert_eq!(parse_size("4G").unwrap(), 4 << 30);
        assert_eq!(parse_size("512 MiB").unwrap(), 512 << 20);
        assert_eq!(parse_size("2GB").unwrap(), 2_000_000_000);
        assert_eq!(parse_size("1.5KiB").unwrap(), 1536);
        assert_eq!(parse_size("1000000").unwrap(), 1_000_000);
        for bad in ["", "GiB", "4 parsecs", "0", "-1G", "1e400"] {
            assert!(parse_size(bad).is_err(), "{bad:?} accepted");
        }
    }

    #[test]
    fn the_default_is_half_of_mem_total() {
        let text = "MemTotal:       16384 kB\nMemFree:         1024 kB\n";
        assert_eq!(mem_total_bytes(text), Some(16384 * 1024));
        assert!(default_budget() > 0);
        assert_eq!(human_bytes(3 << 29), "1.50 GiB");
    }
}
