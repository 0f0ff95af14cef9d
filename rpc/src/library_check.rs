//! Checks a plugin library's ELF structure against its file size before the system loader
//! maps it.
//!
//! The loader trusts the offsets in a library's headers and maps its segments from the file;
//! a half-copied library (`head -c 4096 libmobilis_hall.so`) then faults with SIGBUS inside
//! `dlopen` the first time a page past the end of the file is touched, which kills the whole
//! daemon. Reading the headers first turns that into a refusal with a reason.
//!
//! The layout follows the System V ABI, "ELF header", "Program header" and "Sections"
//! (gABI, <https://refspecs.linuxfoundation.org/elf/gabi4+/contents.html>): the identification
//! bytes give the class (32 or 64 bit) and the byte order, the header gives the offset, entry
//! size and count of the program and section header tables, and each loadable segment
//! (`PT_LOAD`) and each section that occupies file space (all but `SHT_NOBITS`) gives its
//! offset and size in the file. Every one of those must lie within the file.
//!
//! The check runs before any library is mapped, in process or in a worker. A half-copied hall
//! plugin is refused with `refused before loading: the file is 4096 bytes but its loadable
//! segment 1 ends at byte ...: it is truncated (a partial copy?)`.

use std::io::Read;
use std::path::Path;

const ELF_MAGIC: [u8; 4] = [0x7f, b'E', b'L', b'F'];
const CLASS_32: u8 = 1;
const CLASS_64: u8 = 2;
const DATA_LITTLE: u8 = 1;
const DATA_BIG: u8 = 2;
/// `e_type` of a shared object.
const TYPE_SHARED: u16 = 3;
const SEGMENT_LOAD: u32 = 1;
const SECTION_NOBITS: u32 = 8;

/// Reads integers of one ELF file's class and byte order.
struct Layout<'a> {
    bytes: &'a [u8],
    wide: bool,
    little: bool,
}

impl Layout<'_> {
    fn field(&self, offset: u64, width: usize) -> Result<u64, String> {
        let start = usize::try_from(offset).map_err(|_| "an offset does not fit in memory".to_owned())?;
        let end = start
            .checked_add(width)
            .filter(|end| *end <= self.bytes.len())
            .ok_or_else(|| {
                format!(
                    "the file ends at byte {} inside its headers (at byte {start}): it is truncated",
                    self.bytes.len()
                )
            })?;
        let slice = &self.bytes[start..end];
        let mut value = 0u64;
        for index in 0..width {
            let byte = if self.little {
                slice[width - 1 - index]
            } else {
                slice[index]
            };
            value = (value << 8) | u64::from(byte);
        }
        Ok(value)
    }
    fn half(&self, offset: u64) -> Result<u64, String> {
        self.field(offset, 2)
    }
    fn word(&self, offset: u64) -> Result<u64, String> {
        self.field(offset, 4)
    }
    /// An address or offset: 8 bytes in ELF64, 4 in ELF32.
    fn address(&self, offset: u64) -> Result<u64, String> {
        self.field(offset, if self.wide { 8 } else { 4 })
    }
}

/// Refuses, with a reason, an ELF file whose headers point past the end of the file or that
/// is not a shared object. Files without the ELF magic number (text, Mach-O, PE) are left to
/// the system loader, which refuses or loads them without mapping past their end.
pub fn check_library(file: &Path) -> Result<(), String> {
    let mut bytes = Vec::new();
    std::fs::File::open(file)
        .and_then(|mut handle| handle.read_to_end(&mut bytes))
        .map_err(|error| format!("cannot read the library: {error}"))?;
    check_bytes(&bytes)
}

/// [`check_library`] on a file's contents.
pub fn check_bytes(bytes: &[u8]) -> Result<(), String> {
    let size = bytes.len() as u64;
    // Without the magic number the loader reads nothing past the first bytes and refuses the
    // file itself, with its own reason ("invalid ELF header", "file too short").
    if bytes.len() < 4 || bytes[..4] != ELF_MAGIC {
        return Ok(());
    }
    if bytes.len() < 16 {
        return Err(format!(
            "the file is {size} bytes, shorter than the ELF identification (16 bytes): it is truncated"
        ));
    }
    let wide = match bytes[4] {
        CLASS_32 => false,
        CLASS_64 => true,
        other => return Err(format!("unknown ELF class {other} (neither 32 nor 64 bit)")),
    };
    let little = match bytes[5] {
        DATA_LITTLE => true,
        DATA_BIG => false,
        other => return Err(format!("unknown ELF byte order {other}")),
    };
    let elf = Layout { bytes, wide, little };
    let header_size: u64 = if wide { 64 } else { 52 };
    if size < header_size {
        return Err(format!(
            "the file is {size} bytes, shorter than its own ELF header ({header_size} bytes): it is truncated"
        ));
    }
    let kind = elf.half(16)?;
    if kind != u64::from(TYPE_SHARED) {
        return Err(format!("an ELF file of type {kind}, not a shared library (type 3)"));
    }
    // Offsets of the header fields differ between the classes only by the address width.
    let (program_offset, section_offset, sizes_at) = if wide {
        (elf.address(32)?, elf.address(40)?, 54)
    } else {
        (elf.address(28)?, elf.address(32)?, 42)
    };
    let program_entry = elf.half(sizes_at)?;
    let program_count = elf.half(sizes_at + 2)?;
    let section_entry = elf.half(sizes_at + 4)?;
    let section_count = elf.half(sizes_at + 6)?;

    let table_end = |what: &str, offset: u64, entry: u64, count: u64| -> Result<(), String> {
        let end = entry
            .checked_mul(count)
            .and_then(|length| length.checked_add(offset))
            .ok_or_else(|| format!("its {what} table overflows"))?;
        if end > size {
            return Err(format!(
                "the file is {size} bytes but its {what} table ends at byte {end}: it is truncated or corrupt"
            ));
        }
        Ok(())
    };
    if program_count == 0 {
        return Err("the library has no program headers: the loader cannot map it".into());
    }
    table_end("program header", program_offset, program_entry, program_count)?;
    let minimum_program_entry = if wide { 56 } else { 32 };
    if program_entry < minimum_program_entry {
        return Err(format!("program header entries of {program_entry} bytes are too small"));
    }
    for index in 0..program_count {
        let at = program_offset + index * program_entry;
        if elf.word(at)? != u64::from(SEGMENT_LOAD) {
            continue;
        }
        let (offset, file_size) = if wide {
            (elf.address(at + 8)?, elf.address(at + 32)?)
        } else {
            (elf.address(at + 4)?, elf.address(at + 16)?)
        };
        let end = offset.saturating_add(file_size);
        if end > size {
            return Err(format!(
                "the file is {size} bytes but its loadable segment {index} ends at byte {end}: it is truncated (a partial copy?)"
            ));
        }
    }
    // A section header table is optional for loading, but a library that has one and whose
    // sections run past the end was cut short just the same.
    if section_offset != 0 && section_count != 0 {
        table_end("section header", section_offset, section_entry, section_count)?;
        let minimum_section_entry = if wide { 64 } else { 40 };
        if section_entry < minimum_section_entry {
            return Err(format!("section header entries of {section_entry} bytes are too small"));
        }
        for index in 0..section_count {
            let at = section_offset + index * section_entry;
            if elf.word(at + 4)? == u64::from(SECTION_NOBITS) {
                continue;
            }
            let (offset, length) = if wide {
                (elf.address(at + 24)?, elf.address(at + 32)?)
            } else {
                (elf.address(at + 16)?, elf.address(at + 20)?)
            };
            let end = offset.saturating_add(length);
            if end > size {
                return Err(format!(
                    "the file is {size} bytes but its section {index} ends at byte {end}: it is truncated or corrupt"
                ));
            }
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A shared object this test process has mapped (the C library at least): every Linux
    /// process has one, so not finding one is a failure, not a reason to skip.
    #[cfg(target_os = "linux")]
    fn some_shared_library() -> Vec<u8> {
        let maps = std::fs::read_to_string("/proc/self/maps").expect("/proc/self/maps is readable on Linux");
        let path = maps
            .lines()
            .filter_map(|line| line.split_whitespace().nth(5))
            .find(|path| path.contains(".so"))
            .unwrap_or_else(|| panic!("/proc/self/maps names no shared library:\n{maps}"));
        std::fs::read(path).unwrap_or_else(|e| panic!("cannot read {path}: {e}"))
    }

    /// Linux only: the daemon loads ELF plugins there, and `/proc/self/maps` names a library.
    #[cfg(target_os = "linux")]
    #[test]
    fn whole_libraries_pass_and_truncated_ones_are_refused() {
        let bytes = some_shared_library();
        check_bytes(&bytes).expect("a mapped system library passes");
        let cut = check_bytes(&bytes[..4096.min(bytes.len() / 2)]).unwrap_err();
        assert!(cut.contains("truncated"), "{cut}");
        let tiny = check_bytes(&bytes[..40]).unwrap_err();
        assert!(tiny.contains("truncated"), "{tiny}");
        assert!(
            check_bytes(b"#!/bin/sh\necho this is a script\n").is_ok(),
            "left to the loader"
        );
    }

    #[test]
    fn offsets_past_the_end_never_panic() {
        let mut bytes = vec![0u8; 64];
        bytes[..4].copy_from_slice(&ELF_MAGIC);
        bytes[4] = CLASS_64;
        bytes[5] = DATA_LITTLE;
        bytes[16] = TYPE_SHARED as u8;
        bytes[32..40].copy_from_slice(&u64::MAX.to_le_bytes());
        bytes[54] = 56;
        bytes[56] = 0xff;
        bytes[57] = 0xff;
        assert!(check_bytes(&bytes).is_err());
    }
}
