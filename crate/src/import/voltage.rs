//! Raw multichannel voltage: where the samples are in a file and how to turn them into
//! microvolts. Two containers:
//!
//! - **Interleaved samples with a sidecar** (our own format): the data file holds frames of
//!   `channels` samples each, little-endian `int16` or `float32`, nothing else; the sidecar is
//!   a small JSON file:
//!   `{"sample_rate_hz": 20000, "channels": 60, "sample_type": "int16", "scale_uv": 0.195,
//!   "offset_uv": 0, "channel_sites": ["A1", ...]}` (`offset_uv` and `channel_sites` optional).
//!   A sample s is `offset_uv + scale_uv * s` microvolts.
//! - **WAV** (RIFF `WAVE`): 16-bit integer PCM, 32-bit float, or either inside
//!   `WAVE_FORMAT_EXTENSIBLE` (Microsoft, "Multiple channel audio data and WAVE files", 2007).
//!   WAV carries no voltage scale; samples are taken as microvolts times `scale_uv` (1 unless
//!   the user says), and a notice says so.
//!
//! Readers look only at headers; the samples are decoded block by block ([`decode_channel`]),
//! so a file never has to fit in memory.

use super::error::{ImportError, ImportProblem};
use crate::place::Place;
use serde::{Deserialize, Serialize};

/// How one sample is stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum SampleType {
    Int16,
    Float32,
}

impl SampleType {
    pub fn bytes(self) -> usize {
        match self {
            SampleType::Int16 => 2,
            SampleType::Float32 => 4,
        }
    }
}

/// Above this sample rate a file cannot come from an extracellular recording system
/// (multi-electrode arrays sample at 10 to 50 kHz; common practice, no source): the file is
/// still analysed, with a notice asking for the unit of `sample_rate_hz`.
pub const MAX_PLAUSIBLE_SAMPLE_RATE_HZ: f64 = 1e6;

/// Where the samples of a raw voltage file are and what they mean.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VoltageHeader {
    /// File name as given.
    pub file: String,
    pub sample_rate_hz: f64,
    pub channels: usize,
    pub sample_type: SampleType,
    /// Byte offset of the first frame.
    pub data_offset_bytes: u64,
    /// Number of whole frames (one sample per channel).
    pub frames: u64,
    /// Microvolts per stored unit.
    pub scale_uv: f64,
    /// Microvolts added after scaling.
    pub offset_uv: f64,
    /// Site of each channel, when the file says; otherwise channel i is row i of the layout.
    pub channel_sites: Option<Vec<String>>,
    /// `sidecar` or `wav`.
    pub container: String,
}

impl VoltageHeader {
    /// Bytes per frame.
    pub fn frame_bytes(&self) -> usize {
        self.channels * self.sample_type.bytes()
    }

    /// Duration, seconds.
    pub fn duration_s(&self) -> f64 {
        self.frames as f64 / self.sample_rate_hz
    }
}

/// The sidecar file's keys.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
struct Sidecar {
    sample_rate_hz: f64,
    channels: usize,
    sample_type: SampleType,
    scale_uv: f64,
    #[serde(default)]
    offset_uv: f64,
    #[serde(default)]
    channel_sites: Option<Vec<String>>,
}

fn bad(place: Place, problem: ImportProblem, message: impl Into<String>) -> ImportError {
    ImportError::new(place, problem, message)
}

/// Reads a sidecar (`sidecar_name`, its bytes) describing the data file `data_name` of
/// `data_len` bytes.
pub fn read_sidecar(
    sidecar_name: &str,
    sidecar: &[u8],
    data_name: &str,
    data_len: u64,
) -> Result<VoltageHeader, ImportError> {
    let s: Sidecar = serde_json::from_slice(sidecar).map_err(|e| {
        bad(
            Place::file(sidecar_name).at_line(e.line() as u64),
            ImportProblem::BadValue,
            format!(
                "expected the sidecar keys sample_rate_hz, channels, sample_type (int16 or float32), scale_uv and optionally offset_uv and channel_sites; {e}"
            ),
        )
    })?;
    let place = || Place::file(sidecar_name);
    if !(s.sample_rate_hz.is_finite() && s.sample_rate_hz > 0.0) {
        return Err(bad(
            place(),
            ImportProblem::BadValue,
            format!(
                "sample_rate_hz: expected a rate above 0 Hz, found {}",
                crate::place::number(s.sample_rate_hz)
            ),
        ));
    }
    if s.channels == 0 || s.channels > 4096 {
        return Err(bad(
            place(),
            ImportProblem::BadValue,
            format!("channels: expected 1 to 4096, found {}", s.channels),
        ));
    }
    if !(s.scale_uv.is_finite() && s.scale_uv != 0.0 && s.offset_uv.is_finite()) {
        return Err(bad(
            place(),
            ImportProblem::BadValue,
            format!(
                "scale_uv: expected a finite, non-zero number of microvolts per unit (and a finite offset_uv), found {} and {}",
                crate::place::number(s.scale_uv), crate::place::number(s.offset_uv)
            ),
        ));
    }
    if let Some(sites) = &s.channel_sites {
        if sites.len() != s.channels {
            return Err(bad(
                place(),
                ImportProblem::BadValue,
                format!(
                    "channel_sites: expected one site per channel ({}), found {}",
                    s.channels,
                    sites.len()
                ),
            ));
        }
        // Two channels on one site would leave one of them out of the recording.
        let mut seen = std::collections::HashMap::new();
        for (k, site) in sites.iter().enumerate() {
            if let Some(first) = seen.insert(site.as_str(), k) {
                return Err(bad(
                    place(),
                    ImportProblem::BadValue,
                    format!(
                        "channel_sites: expected a different site for every channel, found {site} for channels {} and {}",
                        first + 1,
                        k + 1
                    ),
                ));
            }
        }
    }
    let frame = (s.channels * s.sample_type.bytes()) as u64;
    if data_len % frame != 0 {
        return Err(bad(
            Place::file(data_name),
            ImportProblem::BadValue,
            format!(
                "expected whole frames of {} channels x {} bytes ({frame} bytes each) as {sidecar_name} says, found {data_len} bytes: {} bytes left over (a truncated file, or a sidecar that does not match it)",
                s.channels,
                s.sample_type.bytes(),
                data_len % frame
            ),
        ));
    }
    if data_len == 0 {
        return Err(bad(
            Place::file(data_name),
            ImportProblem::Empty,
            "expected samples, found an empty file",
        ));
    }
    Ok(VoltageHeader {
        file: data_name.to_string(),
        sample_rate_hz: s.sample_rate_hz,
        channels: s.channels,
        sample_type: s.sample_type,
        data_offset_bytes: 0,
        frames: data_len / frame,
        scale_uv: s.scale_uv,
        offset_uv: s.offset_uv,
        channel_sites: s.channel_sites,
        container: "sidecar".into(),
    })
}

fn u16_at(b: &[u8], at: usize) -> Option<u16> {
    Some(u16::from_le_bytes(b.get(at..at + 2)?.try_into().ok()?))
}

fn u32_at(b: &[u8], at: usize) -> Option<u32> {
    Some(u32::from_le_bytes(b.get(at..at + 4)?.try_into().ok()?))
}

/// Whether the bytes start like a WAV file.
pub fn looks_like_wav(head: &[u8]) -> bool {
    head.len() >= 12 && &head[0..4] == b"RIFF" && &head[8..12] == b"WAVE"
}

/// Most chunks walked before the data chunk of a WAV file (metadata chunks are a handful).
pub const MAX_WAV_CHUNKS: usize = 10_000;

/// Reads a WAV header from the file's first bytes (`head`) of a file of `file_len` bytes,
/// walking its chunks; a chunk header beyond `head` (after a long metadata chunk) is read
/// through `read(from_byte, to_byte)`. `scale_uv` is microvolts per stored unit (for float
/// files, per 1.0).
pub fn read_wav_header(
    name: &str,
    head: &[u8],
    file_len: u64,
    scale_uv: f64,
    read: &mut FrameRead<'_>,
) -> Result<VoltageHeader, ImportError> {
    let place = || Place::file(name);
    let truncated = |what: &str| {
        bad(
            place(),
            ImportProblem::BadValue,
            format!("expected {what}, found the end of the file ({file_len} bytes): a truncated or damaged WAV file"),
        )
    };
    if !looks_like_wav(head) {
        return Err(bad(
            place(),
            ImportProblem::BadValue,
            "expected a WAV file (RIFF ... WAVE), found other bytes at its start",
        ));
    }
    // `n` bytes from `at`: from the head when it holds them, else read from the file.
    let mut bytes_at = |at: u64, n: u64| -> Result<Option<Vec<u8>>, ImportError> {
        let end = at.saturating_add(n);
        if end > file_len {
            return Ok(None);
        }
        match head.get(at as usize..end as usize) {
            Some(b) if end <= head.len() as u64 => Ok(Some(b.to_vec())),
            _ => read(at, end).map(|b| (b.len() as u64 == n).then_some(b)),
        }
    };
    let mut at = 12u64;
    let mut format: Option<(u16, usize, u32, u16, u16)> = None; // tag, channels, rate, align, bits
    for _ in 0..MAX_WAV_CHUNKS {
        let chunk = bytes_at(at, 8)?.ok_or_else(|| truncated("a data chunk"))?;
        let id = &chunk[..4];
        let size = u64::from(u32_at(&chunk, 4).ok_or_else(|| truncated("a chunk size"))?);
        let body = at + 8;
        if id == b"fmt " {
            let b = bytes_at(body, size.min(40))?.ok_or_else(|| truncated("the format chunk"))?;
            let b = &b[..];
            let mut tag = u16_at(b, 0).ok_or_else(|| truncated("the format tag"))?;
            let channels = u16_at(b, 2).ok_or_else(|| truncated("the channel count"))? as usize;
            let rate = u32_at(b, 4).ok_or_else(|| truncated("the sample rate"))?;
            let align = u16_at(b, 12).ok_or_else(|| truncated("the block align"))?;
            let bits = u16_at(b, 14).ok_or_else(|| truncated("the bits per sample"))?;
            if tag == 0xFFFE {
                // WAVE_FORMAT_EXTENSIBLE: the real format is the first two bytes of the
                // sub-format GUID, 24 bytes into the extension.
                tag = u16_at(b, 24).ok_or_else(|| truncated("the extensible sub-format"))?;
            }
            format = Some((tag, channels, rate, align, bits));
        } else if id == b"data" {
            let (tag, channels, rate, align, bits) =
                format.ok_or_else(|| truncated("a format chunk before the data"))?;
            let sample_type = match (tag, bits) {
                (1, 16) => SampleType::Int16,
                (3, 32) => SampleType::Float32,
                _ => {
                    return Err(bad(
                        place(),
                        ImportProblem::BadValue,
                        format!(
                            "expected 16-bit integer PCM or 32-bit float samples, found format tag {tag} with {bits} bits per sample"
                        ),
                    ))
                }
            };
            if channels == 0 || rate == 0 {
                return Err(bad(
                    place(),
                    ImportProblem::BadValue,
                    format!("expected at least one channel and a sample rate above 0, found {channels} channels at {rate} Hz"),
                ));
            }
            let frame = (channels * sample_type.bytes()) as u64;
            if u64::from(align) != frame {
                return Err(bad(
                    place(),
                    ImportProblem::BadValue,
                    format!(
                        "expected a block align of {frame} bytes per frame ({channels} channels x {} bytes), found {align}: a damaged WAV header",
                        sample_type.bytes()
                    ),
                ));
            }
            let declared = size;
            let present = file_len.saturating_sub(body);
            // Writers that stream set the size to 0 or 0xFFFFFFFF; take what is there.
            let data_bytes = if declared == 0 || declared == u64::from(u32::MAX) {
                present
            } else if declared > present {
                return Err(bad(
                    place(),
                    ImportProblem::BadValue,
                    format!(
                        "expected {declared} bytes of samples as the header says, found {present}: the file is truncated"
                    ),
                ));
            } else {
                declared
            };
            if data_bytes < frame {
                return Err(bad(
                    place(),
                    ImportProblem::Empty,
                    "expected samples, found none",
                ));
            }
            return Ok(VoltageHeader {
                file: name.to_string(),
                sample_rate_hz: f64::from(rate),
                channels,
                sample_type,
                data_offset_bytes: body,
                frames: data_bytes / frame,
                scale_uv,
                offset_uv: 0.0,
                channel_sites: None,
                container: "wav".into(),
            });
        }
        at = body.saturating_add(size + (size & 1)); // chunks are padded to an even length
    }
    Err(bad(
        place(),
        ImportProblem::BadValue,
        format!("expected a data chunk within the first {MAX_WAV_CHUNKS} chunks, found none: a damaged WAV file"),
    ))
}

/// An int16 sample as a number of stored units, and whether it sits at the int16 limits
/// (-32768 or 32767: the amplifier clipped).
#[inline]
fn int16_sample(b: [u8; 2]) -> (f64, bool) {
    let s = i16::from_le_bytes(b);
    (f64::from(s), s == i16::MIN || s == i16::MAX)
}

/// A float32 sample as a number of stored units (never counted as clipped).
#[inline]
fn float32_sample(b: [u8; 4]) -> (f64, bool) {
    (f64::from(f32::from_le_bytes(b)), false)
}

/// One stored sample starting at byte `at` of a frame, as [`int16_sample`] or
/// [`float32_sample`] read it.
#[inline]
fn stored_sample(sample_type: SampleType, frame: &[u8], at: usize) -> (f64, bool) {
    match sample_type {
        SampleType::Int16 => int16_sample([frame[at], frame[at + 1]]),
        SampleType::Float32 => {
            float32_sample([frame[at], frame[at + 1], frame[at + 2], frame[at + 3]])
        }
    }
}

/// Decodes one channel of a block of whole frames (raw bytes from the file) into microvolts,
/// appending to `out`.
pub fn decode_channel(header: &VoltageHeader, frames: &[u8], channel: usize, out: &mut Vec<f64>) {
    let at = channel * header.sample_type.bytes();
    out.extend(
        frames.chunks_exact(header.frame_bytes()).map(|f| {
            header.offset_uv + header.scale_uv * stored_sample(header.sample_type, f, at).0
        }),
    );
}

/// Decodes channels `first..first + LANES` of a block of whole frames into microvolts,
/// appending one [`crate::detect::filter::Lanes`] per frame to `out` (lanes past the last
/// channel are 0), and adds to `saturated[l]` the samples of lane l at the int16 limits
/// among frames `count_in`.
pub fn decode_lanes(
    header: &VoltageHeader,
    frames: &[u8],
    first: usize,
    out: &mut Vec<crate::detect::filter::Lanes>,
    saturated: &mut [usize],
    count_in: std::ops::Range<usize>,
) {
    let frame_bytes = header.frame_bytes();
    out.reserve(frames.len() / frame_bytes.max(1));
    // One loop per stored type, so the inner loop has no type dispatch.
    match header.sample_type {
        SampleType::Int16 => decode_lanes_as(
            header,
            frames,
            first,
            out,
            saturated,
            count_in,
            int16_sample,
        ),
        SampleType::Float32 => decode_lanes_as(
            header,
            frames,
            first,
            out,
            saturated,
            count_in,
            float32_sample,
        ),
    }
}

/// [`decode_lanes`] for samples of `W` bytes read by `read` (value in stored units, clipped).
fn decode_lanes_as<const W: usize>(
    header: &VoltageHeader,
    frames: &[u8],
    first: usize,
    out: &mut Vec<crate::detect::filter::Lanes>,
    saturated: &mut [usize],
    count_in: std::ops::Range<usize>,
    read: impl Fn([u8; W]) -> (f64, bool),
) {
    use crate::detect::filter::LANES;
    let (scale, offset) = (header.scale_uv, header.offset_uv);
    let count = LANES.min(header.channels.saturating_sub(first));
    let (from, to) = (first * W, (first + count) * W);
    for (k, f) in frames.chunks_exact(header.frame_bytes()).enumerate() {
        let counting = count_in.contains(&k);
        let mut lanes = [0.0; LANES];
        for ((v, b), clipped_count) in lanes
            .iter_mut()
            .zip(f[from..to].chunks_exact(W))
            .zip(saturated.iter_mut())
        {
            let mut bytes = [0u8; W];
            bytes.copy_from_slice(b);
            let (raw, clipped) = read(bytes);
            *clipped_count += usize::from(counting && clipped);
            *v = offset + scale * raw;
        }
        out.push(lanes);
    }
}

/// The header of a raw voltage file from its first bytes: a WAV file carries its own (chunk
/// headers past `head` are read through `read(from_byte, to_byte)`); raw interleaved samples
/// need their sidecar `(name, bytes)`, which the shell looks for as [`super::sidecar_names`]
/// says. `len` is the file's size in bytes.
pub fn read_voltage_header(
    name: &str,
    head: &[u8],
    len: u64,
    sidecar: Option<(&str, &[u8])>,
    wav_uv_per_unit: f64,
    read: &mut FrameRead<'_>,
) -> Result<VoltageHeader, ImportError> {
    if looks_like_wav(head) || super::has_wav_extension(name) {
        if !(wav_uv_per_unit.is_finite() && wav_uv_per_unit > 0.0) {
            return Err(ImportError::new(
                Place::file(name),
                ImportProblem::BadOption,
                format!(
                    "expected a WAV scale (--uv-per-unit) above 0 microvolts per unit, found {wav_uv_per_unit}: 0 or NaN would make every electrode flat, and a negative scale would turn spikes over"
                ),
            ));
        }
        return read_wav_header(name, head, len, wav_uv_per_unit, read);
    }
    match sidecar {
        Some((sidecar_name, bytes)) => read_sidecar(sidecar_name, bytes, name, len),
        None => Err(ImportError::new(
            Place::file(name),
            ImportProblem::MissingColumn,
            format!(
                "expected a WAV file, or raw samples with their JSON sidecar (sample_rate_hz, channels, sample_type and scale_uv); found no sidecar, looked for as {}",
                super::sidecar_names(name).join(" or ")
            ),
        )),
    }
}

/// Reads whole frames `[first, end)` of a raw voltage file as bytes (the shells read the file;
/// the core asks for blocks).
pub type FrameRead<'a> = dyn FnMut(u64, u64) -> Result<Vec<u8>, ImportError> + 'a;

/// Frames `[from, to)` of a voltage file read through `read(from_byte, to_byte)` (a file, or
/// the page's `File.slice`), checking that every byte came.
pub fn frame_reader<'a>(
    header: &VoltageHeader,
    read: &'a mut dyn FnMut(u64, u64) -> Result<Vec<u8>, ImportError>,
) -> impl FnMut(u64, u64) -> Result<Vec<u8>, ImportError> + 'a {
    let frame = header.frame_bytes() as u64;
    let offset = header.data_offset_bytes;
    let file = header.file.clone();
    move |from: u64, to: u64| {
        let (a, b) = (offset + from * frame, offset + to * frame);
        let bytes = read(a, b)?;
        if bytes.len() as u64 != b - a {
            return Err(ImportError::new(
                Place::file(&file),
                ImportProblem::BadValue,
                format!(
                    "expected {} bytes at byte {a}, found {} (the file changed or is truncated)",
                    b - a,
                    bytes.len()
                ),
            ));
        }
        Ok(bytes)
    }
}
