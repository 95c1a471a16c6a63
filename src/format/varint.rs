//! LEB128 unsigned varints: 7 bits per byte, low bits first, high bit set on all but the last.

/// Appends `value` as a varint.
///
/// # Examples
/// ```
/// let mut buf = Vec::new();
/// baler::format::write_varint(&mut buf, 300);
/// assert_eq!(buf, [0xAC, 0x02]);
/// assert_eq!(baler::format::read_varint(&buf, &mut 0), Some(300));
/// ```
#[inline]
pub fn write_varint(out: &mut Vec<u8>, mut value: u64) {
    while value >= 0x80 {
        out.push((value as u8) | 0x80);
        value >>= 7;
    }
    out.push(value as u8);
}

/// Reads a varint at `*pos`, advancing it; `None` if the bytes end early or it overflows u64.
#[inline]
pub fn read_varint(data: &[u8], pos: &mut usize) -> Option<u64> {
    let mut value = 0u64;
    let mut shift = 0u32;
    loop {
        let byte = *data.get(*pos)?;
        *pos += 1;
        if shift == 63 && byte > 1 {
            return None;
        }
        value |= u64::from(byte & 0x7F) << shift;
        if byte < 0x80 {
            return Some(value);
        }
        shift += 7;
        if shift > 63 {
            return None;
        }
    }
}

/// A cursor reading varints from a byte slice.
#[derive(Clone, Debug)]
pub struct VarintReader<'a> {
    data: &'a [u8],
    pos: usize,
}

impl<'a> VarintReader<'a> {
    /// A cursor at the start of `data`.
    pub fn new(data: &'a [u8]) -> VarintReader<'a> {
        VarintReader { data, pos: 0 }
    }

    /// The next varint, `None` when malformed or past the end.
    #[inline]
    pub fn next_varint(&mut self) -> Option<u64> {
        read_varint(self.data, &mut self.pos)
    }

    /// Skips `n` varints.
    #[inline]
    pub fn skip(&mut self, n: usize) -> Option<()> {
        for _ in 0..n {
            self.next_varint()?;
        }
        Some(())
    }

    /// Bytes consumed so far.
    pub fn position(&self) -> usize {
        self.pos
    }
}
