//! A short text gathered on the stack: [`StackBuffer`] takes `fmt` and `io` writes up to its
//! capacity and refuses the write that would overflow it (`Err`, the buffer unchanged by
//! that write), so callers fall back to a heap path only for the rare long text.

/// Up to `N` bytes written without allocating.
pub struct StackBuffer<const N: usize> {
    bytes: [u8; N],
    len: usize,
}

impl<const N: usize> Default for StackBuffer<N> {
    fn default() -> Self {
        StackBuffer {
            bytes: [0; N],
            len: 0,
        }
    }
}

impl<const N: usize> StackBuffer<N> {
    /// The bytes written so far.
    pub fn as_bytes(&self) -> &[u8] {
        &self.bytes[..self.len]
    }

    /// Appends `bytes`; false (and nothing appended) when they do not fit.
    #[inline]
    fn append(&mut self, bytes: &[u8]) -> bool {
        let end = self.len + bytes.len();
        if end > N {
            return false;
        }
        self.bytes[self.len..end].copy_from_slice(bytes);
        self.len = end;
        true
    }
}

impl<const N: usize> std::fmt::Write for StackBuffer<N> {
    fn write_str(&mut self, text: &str) -> std::fmt::Result {
        if self.append(text.as_bytes()) {
            Ok(())
        } else {
            Err(std::fmt::Error)
        }
    }
}

impl<const N: usize> std::io::Write for StackBuffer<N> {
    fn write(&mut self, bytes: &[u8]) -> std::io::Result<usize> {
        self.write_all(bytes)?;
        Ok(bytes.len())
    }

    #[inline]
    fn write_all(&mut self, bytes: &[u8]) -> std::io::Result<()> {
        if self.append(bytes) {
            Ok(())
        } else {
            Err(std::io::ErrorKind::WriteZero.into())
        }
    }

    fn flush(&mut self) -> std::io::Result<()> {
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write;

    #[test]
    fn refuses_what_does_not_fit_and_keeps_what_did() {
        let mut buffer = StackBuffer::<4>::default();
        buffer.write_all(b"abc").unwrap();
        assert!(buffer.write_all(b"de").is_err());
        assert!(std::fmt::Write::write_str(&mut buffer, "de").is_err());
        buffer.write_all(b"d").unwrap();
        assert_eq!(buffer.as_bytes(), b"abcd");
    }
}
