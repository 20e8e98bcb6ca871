//! Page headers of a Parquet column chunk, read with a minimal Thrift compact-protocol reader
//! and checked against the chunk before the library decodes them.
//!
//! Only the integer fields that size buffers are kept: `uncompressed_page_size` (2),
//! `compressed_page_size` (3), and `num_values` of data (5.1), dictionary (7.1) and v2 data
//! pages (8.1, with `num_nulls` 8.2 and `num_rows` 8.3). Everything else is skipped. The
//! reader never allocates and gives up (an error) on anything malformed.

/// A cursor over Thrift compact-protocol bytes.
struct Compact<'a> {
    bytes: &'a [u8],
    pos: usize,
}

impl Compact<'_> {
    fn byte(&mut self) -> Option<u8> {
        let b = *self.bytes.get(self.pos)?;
        self.pos += 1;
        Some(b)
    }

    fn advance(&mut self, n: u64) -> Option<()> {
        let end = self.pos.checked_add(usize::try_from(n).ok()?)?;
        (end <= self.bytes.len()).then(|| self.pos = end)
    }

    fn varint(&mut self) -> Option<u64> {
        let mut v = 0u64;
        for shift in (0..70).step_by(7) {
            let b = self.byte()?;
            v |= u64::from(b & 0x7F).checked_shl(shift)?;
            if b & 0x80 == 0 {
                return Some(v);
            }
        }
        None
    }

    fn zigzag(&mut self) -> Option<i64> {
        let v = self.varint()?;
        Some((v >> 1) as i64 ^ -((v & 1) as i64))
    }

    /// Skip one value of compact type `ty` (`in_list`: booleans take a byte).
    fn skip(&mut self, ty: u8, in_list: bool, depth: u8) -> Option<()> {
        if depth > 32 {
            return None;
        }
        match ty {
            1 | 2 if in_list => self.byte().map(drop),
            1 | 2 => Some(()),
            3 => self.byte().map(drop),
            4..=6 => self.varint().map(drop),
            7 => self.advance(8),
            8 => {
                let n = self.varint()?;
                self.advance(n)
            }
            9 | 10 => {
                let head = self.byte()?;
                let n = match head >> 4 {
                    15 => self.varint()?,
                    n => u64::from(n),
                };
                for _ in 0..n {
                    self.skip(head & 0x0F, true, depth + 1)?;
                }
                Some(())
            }
            11 => {
                let n = self.varint()?;
                if n > 0 {
                    let kv = self.byte()?;
                    for _ in 0..n {
                        self.skip(kv >> 4, true, depth + 1)?;
                        self.skip(kv & 0x0F, true, depth + 1)?;
                    }
                }
                Some(())
            }
            12 => self.fields(0, depth + 1, &mut Vec::new()),
            _ => None,
        }
    }

    /// Read a struct, pushing its integer fields as (`prefix` × 100 + field id, value); the
    /// fields of structs nested one level are kept the same way, deeper ones skipped.
    fn fields(&mut self, prefix: i64, depth: u8, out: &mut Vec<(i64, i64)>) -> Option<()> {
        let mut last: i64 = 0;
        loop {
            let head = self.byte()?;
            if head == 0 {
                return Some(());
            }
            let ty = head & 0x0F;
            let id = match head >> 4 {
                0 => self.zigzag()?,
                delta => last + i64::from(delta),
            };
            last = id;
            match ty {
                4..=6 => out.push((prefix * 100 + id, self.zigzag()?)),
                12 if prefix == 0 => self.fields(id, depth + 1, out)?,
                _ => self.skip(ty, false, depth)?,
            }
        }
    }
}

/// Check the page headers filling `chunk` (a column chunk's bytes) against the chunk's count
/// of values and the file length.
pub(super) fn check(chunk: &[u8], values: u64, file_len: u64) -> Result<(), String> {
    let mut pos = 0usize;
    let mut page = 0;
    while pos < chunk.len() {
        page += 1;
        let mut c = Compact {
            bytes: &chunk[pos..],
            pos: 0,
        };
        let mut ints = Vec::new();
        c.fields(0, 0, &mut ints)
            .ok_or_else(|| format!("the header of page {page} cannot be read"))?;
        let get = |id: i64| ints.iter().find(|(k, _)| *k == id).map(|(_, v)| *v);
        let fits = |v: Option<i64>, max: u64| v.is_none_or(|v| v >= 0 && v as u64 <= max);
        let compressed = get(3).ok_or_else(|| format!("page {page} has no size"))?;
        let end = u64::try_from(compressed)
            .ok()
            .and_then(|n| n.checked_add((pos + c.pos) as u64))
            .filter(|end| *end <= chunk.len() as u64)
            .ok_or_else(|| {
                format!("page {page} claims {compressed} bytes, beyond its column chunk")
            })?;
        if !fits(
            get(2),
            file_len.saturating_mul(super::UNCOMPRESSED_PER_BYTE),
        ) {
            return Err(format!(
                "page {page} claims an impossible uncompressed size"
            ));
        }
        let dictionary = file_len.saturating_mul(super::ROWS_PER_BYTE);
        if !(fits(get(501), values)
            && fits(get(701), dictionary)
            && fits(get(801), values)
            && fits(get(802), values)
            && fits(get(803), values))
        {
            return Err(format!(
                "page {page} claims more values than its column chunk's {values}"
            ));
        }
        pos = end as usize;
    }
    Ok(())
}
