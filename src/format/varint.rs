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

/// Reads a varint from the front of `bytes`, advancing the slice; `None` as [`read_varint`].
#[inline]
pub(crate) fn take_varint(bytes: &mut &[u8]) -> Option<u64> {
    let mut pos = 0;
    let v = read_varint(bytes, &mut pos)?;
    *bytes = &bytes[pos..];
    Some(v)
}

/// Reads a varint from a stream: `Ok(None)` at a clean end of the stream, an
/// `UnexpectedEof` error when it ends inside the varint, `InvalidData` past 64 bits.
pub(crate) fn read_varint_from<R: std::io::Read>(r: &mut R) -> std::io::Result<Option<u64>> {
    let mut v = 0u64;
    let mut byte = [0u8];
    for (k, shift) in (0..64).step_by(7).enumerate() {
        match r.read(&mut byte)? {
            0 if k == 0 => return Ok(None),
            0 => return Err(std::io::ErrorKind::UnexpectedEof.into()),
            _ => {}
        }
        if shift == 63 && byte[0] > 1 {
            break; // past 64 bits
        }
        v |= u64::from(byte[0] & 0x7f) << shift;
        if byte[0] < 0x80 {
            return Ok(Some(v));
        }
    }
    Err(std::io::Error::new(
        std::io::ErrorKind::InvalidData,
        "varint too long",
    ))
}
