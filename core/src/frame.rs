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

/// What every front end does, whatever its arithmetic and stages: code that
/// works with any of them (a board's loop, a host tool) is generic over
/// this, not over the concrete types.
pub trait StreamingFrontEnd {
    /// A frame's values (the last stage's output).
    type Value: Copy;

    /// The configuration in use.
    fn configuration(&self) -> &crate::config::FeatureConfig;

    /// Back to the state of a new front end (no samples, zero filter state,
    /// the stages' carried state cleared).
    fn restart(&mut self);

    /// Consumes 16-bit samples from the front of `input` until a frame
    /// completes and returns it (telling `probe` as each stage ends), or
    /// `None` once `input` is empty.
    fn next_frame_with<P: crate::probe::StageProbe>(
        &mut self,
        input: &mut &[i16],
        probe: &mut P,
    ) -> Option<Frame<'_, Self::Value>>;
}
