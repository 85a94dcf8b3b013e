//! Frames handed out by the front ends.

/// One output frame, borrowed from the front end until the next call.
///
/// Later stages (sliding model window, int8, DCT, PCEN) add fields here; the
/// log-mel bands stay as they are.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Frame<'a, T> {
    /// Frame number from the start of the stream: frame `i` covers samples
    /// `[i·hop, i·hop + window)`.
    pub index: u64,
    /// One log-mel value per band, lowest band first.
    pub bands: &'a [T],
}
