//! The mono signals of the scene's sources. Every voice is synthesised sample by sample from
//! its own seeded random stream, so its output depends only on the seed and the sample index,
//! never on how the stream is cut into blocks. Each voice aims at roughly unit RMS while it
//! sounds; the scene's level table sets the mix.

use super::filters::{Biquad, OnePole, Resonator};
use super::random::{NOISE_RMS, Random};
use std::f64::consts::PI;

/// A mono signal generator. `fill` writes the next `out.len()` samples and never allocates.
pub(crate) trait Voice: Send {
    fn fill(&mut self, out: &mut [f32]);
}

fn seconds_to_samples(seconds: f64, sample_rate_hz: f64) -> u64 {
    (seconds * sample_rate_hz).round().max(1.0) as u64
}

fn midi_to_hz(note: u8) -> f64 {
    440.0 * 2f64.powf((f64::from(note) - 69.0) / 12.0)
}

// ---------------------------------------------------------------------------------------------
// Guitar: Karplus–Strong plucked strings (Karplus & Strong 1983) playing an arpeggio.

/// Chords of the busker's loop, one per bar, six notes each (MIDI numbers, low to high):
/// A minor, F major, C major, G major.
const GUITAR_CHORDS: [[u8; 6]; 4] = [
    [40, 45, 52, 57, 60, 64],
    [41, 48, 53, 57, 60, 65],
    [43, 48, 52, 55, 60, 64],
    [43, 47, 50, 55, 59, 67],
];
/// Which string each eighth note of a bar plucks.
const GUITAR_PATTERN: [usize; 8] = [0, 3, 4, 5, 2, 4, 3, 5];
const GUITAR_EIGHTH_S: f64 = 0.25;
const GUITAR_RING_60_DB_S: f64 = 2.5;
const GUITAR_LOWEST_HZ: f64 = 80.0;

struct PluckedString {
    delay: Vec<f64>,
    len: usize,
    pos: usize,
    loss: f64,
}

impl PluckedString {
    #[inline]
    fn next(&mut self) -> f64 {
        let next = if self.pos + 1 == self.len {
            0
        } else {
            self.pos + 1
        };
        let out = self.delay[self.pos];
        self.delay[self.pos] = self.loss * 0.5 * (out + self.delay[next]);
        self.pos = next;
        out
    }
}

pub(crate) struct Guitar {
    sample_rate_hz: f64,
    strings: Vec<PluckedString>,
    excitation: Vec<f64>,
    samples_per_eighth: u64,
    until_next_pluck: u64,
    eighth_index: u64,
    random: Random,
}

impl Guitar {
    pub(crate) fn new(sample_rate_hz: f64, random: Random) -> Self {
        let capacity = (sample_rate_hz / GUITAR_LOWEST_HZ).ceil() as usize + 2;
        let strings = (0..6)
            .map(|_| PluckedString {
                delay: vec![0.0; capacity],
                len: 2,
                pos: 0,
                loss: 0.99,
            })
            .collect();
        Self {
            sample_rate_hz,
            strings,
            excitation: vec![0.0; capacity],
            samples_per_eighth: seconds_to_samples(GUITAR_EIGHTH_S, sample_rate_hz),
            until_next_pluck: 0,
            eighth_index: 0,
            random,
        }
    }

    fn pluck(&mut self) {
        let bar = (self.eighth_index / 8) as usize % GUITAR_CHORDS.len();
        let step = (self.eighth_index % 8) as usize;
        let string_index = GUITAR_PATTERN[step];
        let freq_hz = midi_to_hz(GUITAR_CHORDS[bar][string_index]);
        // The averaging loop filter adds half a sample of delay.
        let len = ((self.sample_rate_hz / freq_hz - 0.5).round() as usize)
            .clamp(2, self.excitation.len());
        let velocity = if step == 0 { 1.0 } else { 0.75 } * self.random.range(0.8, 1.0);
        // Soft pick: low-passed noise burst with its mean removed (no DC in the loop).
        let mut smooth = 0.0;
        let mut sum = 0.0;
        for value in &mut self.excitation[..len] {
            smooth = 0.7 * smooth + 0.3 * self.random.noise();
            *value = smooth;
            sum += smooth;
        }
        let mean = sum / len as f64;
        let string = &mut self.strings[string_index];
        string.len = len;
        string.pos = 0;
        string.loss = 10f64.powf(-3.0 / (freq_hz * GUITAR_RING_60_DB_S));
        for (slot, &value) in string.delay.iter_mut().zip(&self.excitation[..len]) {
            // A new note on a ringing string damps the old one to a third.
            *slot = 0.3 * *slot + 3.0 * velocity * (value - mean);
        }
        self.eighth_index += 1;
    }
}

impl Voice for Guitar {
    fn fill(&mut self, out: &mut [f32]) {
        for sample in out {
            if self.until_next_pluck == 0 {
                self.pluck();
                self.until_next_pluck = self.samples_per_eighth;
            }
            self.until_next_pluck -= 1;
            let sum: f64 = self.strings.iter_mut().map(PluckedString::next).sum();
            *sample = sum as f32;
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Talkers: a glottal pulse train through three formant band-passes, cut into syllables.

/// Formant frequencies F1..F3 in Hz of five vowels (average adult male values, after Peterson &
/// Barney 1952, from memory).
const VOWEL_FORMANTS_HZ: [[f64; 3]; 5] = [
    [730.0, 1090.0, 2440.0],
    [530.0, 1840.0, 2480.0],
    [270.0, 2290.0, 3010.0],
    [570.0, 840.0, 2410.0],
    [300.0, 870.0, 2240.0],
];
const FORMANT_BANDWIDTH_HZ: [f64; 3] = [90.0, 110.0, 160.0];
const FORMANT_GAIN: [f64; 3] = [1.0, 0.6, 0.3];
/// Lengths of the conversation's turns in seconds; turn k belongs to talker k mod 2. The list
/// repeats.
const TURNS_S: [f64; 6] = [2.6, 3.4, 1.8, 3.0, 2.2, 2.8];
const TURN_GAP_S: f64 = 0.35;

/// Turn boundaries in samples over one conversation cycle.
struct TurnSchedule {
    /// (start, end) of each turn within the cycle.
    turns: [(u64, u64); 6],
    cycle_len: u64,
}

impl TurnSchedule {
    fn new(sample_rate_hz: f64) -> Self {
        let mut turns = [(0, 0); 6];
        let mut t = 0;
        for (turn, length_s) in turns.iter_mut().zip(TURNS_S) {
            let start = t;
            t += seconds_to_samples(length_s, sample_rate_hz);
            *turn = (start, t);
            t += seconds_to_samples(TURN_GAP_S, sample_rate_hz);
        }
        Self {
            turns,
            cycle_len: t,
        }
    }

    /// Samples left in `talker`'s current turn at absolute sample `now` (0 if not its turn),
    /// and the number of samples until its next turn starts.
    fn position(&self, talker: usize, now: u64) -> (u64, u64) {
        let cycle_start = now - now % self.cycle_len;
        let within = now - cycle_start;
        let mut until_next = u64::MAX;
        for (k, &(start, end)) in self.turns.iter().enumerate() {
            if k % 2 != talker {
                continue;
            }
            if within >= start && within < end {
                return (end - within, 0);
            }
            if start > within {
                until_next = until_next.min(start - within);
            }
        }
        if until_next == u64::MAX {
            // Next turn is in the following cycle.
            let first_start = self.turns[talker].0;
            until_next = self.cycle_len - within + first_start;
        }
        (0, until_next)
    }
}

pub(crate) struct Talker {
    sample_rate_hz: f64,
    talker: usize,
    schedule: TurnSchedule,
    random: Random,
    now: u64,
    segment_len: u64,
    segment_pos: u64,
    voiced: bool,
    fricative_len: u64,
    base_pitch_hz: f64,
    formant_scale: f64,
    pitch_hz: f64,
    phase: f64,
    previous_pulse: f64,
    formants: [Biquad; 3],
    fricative_filter: Biquad,
}

impl Talker {
    /// `talker` 0 or 1; they take alternate turns. Talker 1 has a higher voice.
    pub(crate) fn new(sample_rate_hz: f64, talker: usize, random: Random) -> Self {
        let (base_pitch_hz, formant_scale) = if talker == 0 {
            (118.0, 1.0)
        } else {
            (205.0, 1.15)
        };
        Self {
            sample_rate_hz,
            talker,
            schedule: TurnSchedule::new(sample_rate_hz),
            random,
            now: 0,
            segment_len: 1,
            segment_pos: 1,
            voiced: false,
            fricative_len: 0,
            base_pitch_hz,
            formant_scale,
            pitch_hz: base_pitch_hz,
            phase: 0.0,
            previous_pulse: 0.0,
            formants: [Biquad::default(); 3],
            fricative_filter: Biquad::high_pass(3000.0, 0.7, sample_rate_hz),
        }
    }

    fn start_segment(&mut self) {
        let fs = self.sample_rate_hz;
        let (left_in_turn, until_next_turn) = self.schedule.position(self.talker, self.now);
        let min_syllable = seconds_to_samples(0.12, fs);
        self.segment_pos = 0;
        if left_in_turn < min_syllable {
            // Listen until the next turn (or to the end of this one).
            self.voiced = false;
            self.segment_len = (left_in_turn + until_next_turn).max(1);
            return;
        }
        if self.random.unit() < 0.15 {
            self.voiced = false;
            self.segment_len =
                seconds_to_samples(self.random.range(0.08, 0.2), fs).min(left_in_turn);
            return;
        }
        self.voiced = true;
        self.segment_len = seconds_to_samples(self.random.range(0.12, 0.3), fs).min(left_in_turn);
        self.fricative_len = if self.random.unit() < 0.5 {
            seconds_to_samples(0.03, fs)
        } else {
            0
        };
        self.pitch_hz = self.base_pitch_hz * self.random.range(0.9, 1.12);
        let vowel = VOWEL_FORMANTS_HZ[self.random.index(VOWEL_FORMANTS_HZ.len())];
        for ((formant, freq_hz), bandwidth_hz) in self
            .formants
            .iter_mut()
            .zip(vowel)
            .zip(FORMANT_BANDWIDTH_HZ)
        {
            let freq_hz = freq_hz * self.formant_scale;
            formant.retune(&Biquad::band_pass(freq_hz, freq_hz / bandwidth_hz, fs));
        }
    }
}

impl Voice for Talker {
    fn fill(&mut self, out: &mut [f32]) {
        for sample in out {
            if self.segment_pos >= self.segment_len {
                self.start_segment();
            }
            let u = self.segment_pos as f64 / self.segment_len as f64;
            let mut excitation = 0.0;
            if self.voiced {
                let envelope = (PI * u).sin().powi(2);
                let pitch_hz = self.pitch_hz * (1.0 + 0.08 * (PI * u).sin() - 0.06 * u);
                self.phase += pitch_hz / self.sample_rate_hz;
                if self.phase >= 1.0 {
                    self.phase -= 1.0;
                }
                // Raised-cosine glottal pulse over the open half of each period,
                // differentiated (lip radiation).
                let pulse = if self.phase < 0.5 {
                    0.5 - 0.5 * (4.0 * PI * self.phase).cos()
                } else {
                    0.0
                };
                let glottal = pulse - self.previous_pulse;
                self.previous_pulse = pulse;
                let breath = 0.02 * self.random.noise();
                excitation = envelope * (glottal * 12.0 + breath);
            }
            let mut voice: f64 = self
                .formants
                .iter_mut()
                .zip(FORMANT_GAIN)
                .map(|(formant, gain)| gain * formant.process(excitation))
                .sum();
            let hiss = if self.voiced && self.segment_pos < self.fricative_len {
                let fade = 1.0 - self.segment_pos as f64 / self.fricative_len as f64;
                0.5 * fade * self.random.noise()
            } else {
                0.0
            };
            voice += self.fricative_filter.process(hiss);
            *sample = (4.0 * voice) as f32;
            self.segment_pos += 1;
            self.now += 1;
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Tram bell: inharmonic struck partials, rung once a second while the tram passes.

const BELL_FUNDAMENTAL_HZ: f64 = 740.0;
/// Partial ratio, relative amplitude, 60 dB decay time in seconds (invented, bell-like).
const BELL_PARTIALS: [(f64, f64, f64); 6] = [
    (1.0, 1.0, 1.6),
    (1.59, 0.6, 1.1),
    (2.14, 0.45, 0.8),
    (2.30, 0.35, 0.7),
    (2.65, 0.25, 0.5),
    (3.16, 0.18, 0.4),
];
/// The tram's pass repeats with this period; strikes happen at 0.5, 1.5, … 8.5 s into it.
pub(crate) const TRAM_CYCLE_S: f64 = 10.0;
const BELL_FIRST_STRIKE_S: f64 = 0.5;
const BELL_STRIKE_INTERVAL_S: f64 = 1.0;
const BELL_STRIKES_PER_PASS: u64 = 9;

pub(crate) struct TramBell {
    partials: [Resonator; 6],
    random: Random,
    now: u64,
    cycle_len: u64,
    first_strike: u64,
    strike_interval: u64,
}

impl TramBell {
    pub(crate) fn new(sample_rate_hz: f64, random: Random) -> Self {
        let partials = BELL_PARTIALS.map(|(ratio, _, decay_s)| {
            Resonator::new(BELL_FUNDAMENTAL_HZ * ratio, decay_s, sample_rate_hz)
        });
        Self {
            partials,
            random,
            now: 0,
            cycle_len: seconds_to_samples(TRAM_CYCLE_S, sample_rate_hz),
            first_strike: seconds_to_samples(BELL_FIRST_STRIKE_S, sample_rate_hz),
            strike_interval: seconds_to_samples(BELL_STRIKE_INTERVAL_S, sample_rate_hz),
        }
    }
}

impl Voice for TramBell {
    fn fill(&mut self, out: &mut [f32]) {
        for sample in out {
            let within = self.now % self.cycle_len;
            let strike = if within >= self.first_strike
                && (within - self.first_strike).is_multiple_of(self.strike_interval)
                && (within - self.first_strike) / self.strike_interval < BELL_STRIKES_PER_PASS
            {
                self.random.range(0.85, 1.0)
            } else {
                0.0
            };
            let sum: f64 = self
                .partials
                .iter_mut()
                .zip(BELL_PARTIALS)
                .map(|(partial, (_, amplitude, _))| partial.process(strike * amplitude))
                .sum();
            *sample = (0.9 * sum) as f32;
            self.now += 1;
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Gulls: bursts of gliding harmonic chirps separated by silences.

pub(crate) struct Gull {
    sample_rate_hz: f64,
    random: Random,
    /// Samples of silence left before the next chirp.
    silence_left: u64,
    chirps_left_in_burst: u32,
    chirp_len: u64,
    chirp_pos: u64,
    base_hz: f64,
    phase: f64,
    rasp: OnePole,
}

impl Gull {
    pub(crate) fn new(sample_rate_hz: f64, mut random: Random) -> Self {
        let silence_left = seconds_to_samples(random.range(0.3, 2.5), sample_rate_hz);
        Self {
            sample_rate_hz,
            random,
            silence_left,
            chirps_left_in_burst: 0,
            chirp_len: 0,
            chirp_pos: 0,
            base_hz: 1800.0,
            phase: 0.0,
            rasp: OnePole::new(2500.0, sample_rate_hz),
        }
    }

    fn start_chirp(&mut self) {
        let fs = self.sample_rate_hz;
        if self.chirps_left_in_burst == 0 {
            self.chirps_left_in_burst = 2 + self.random.index(4) as u32;
            self.base_hz = self.random.range(1500.0, 2100.0);
        }
        self.chirps_left_in_burst -= 1;
        self.chirp_len = seconds_to_samples(self.random.range(0.18, 0.4), fs);
        self.chirp_pos = 0;
        self.phase = 0.0;
    }
}

impl Voice for Gull {
    fn fill(&mut self, out: &mut [f32]) {
        for sample in out {
            if self.chirp_pos >= self.chirp_len {
                if self.silence_left > 0 {
                    self.silence_left -= 1;
                    *sample = 0.0;
                    continue;
                }
                self.start_chirp();
            }
            let u = self.chirp_pos as f64 / self.chirp_len as f64;
            let freq_hz = self.base_hz * (1.0 + 0.35 * (PI * u).sin() - 0.3 * u);
            self.phase += freq_hz / self.sample_rate_hz;
            if self.phase >= 1.0 {
                self.phase -= 1.0;
            }
            let angle = 2.0 * PI * self.phase;
            let tone = angle.sin() + 0.45 * (2.0 * angle).sin() + 0.2 * (3.0 * angle).sin();
            let rasp = self.rasp.process(self.random.noise());
            let envelope = (PI * u).sin().powi(2) * (1.0 - 0.5 * u);
            *sample = (1.6 * envelope * (tone + 0.6 * rasp)) as f32;
            self.chirp_pos += 1;
            if self.chirp_pos >= self.chirp_len {
                let gap_s = if self.chirps_left_in_burst > 0 {
                    self.random.range(0.08, 0.2)
                } else {
                    self.random.range(2.0, 6.0)
                };
                self.silence_left = seconds_to_samples(gap_s, self.sample_rate_hz);
            }
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Fountain: band-limited noise with a slow splashing modulation.

pub(crate) struct Fountain {
    random: Random,
    high_pass: Biquad,
    low_pass: Biquad,
    splash: OnePole,
    splash_gain: f64,
}

impl Fountain {
    pub(crate) fn new(sample_rate_hz: f64, random: Random) -> Self {
        let splash = OnePole::new(4.0, sample_rate_hz);
        Self {
            random,
            high_pass: Biquad::high_pass(300.0, 0.7, sample_rate_hz),
            low_pass: Biquad::low_pass(3500.0, 0.7, sample_rate_hz),
            splash_gain: 1.0 / (splash.white_noise_gain() * NOISE_RMS),
            splash,
        }
    }
}

impl Voice for Fountain {
    fn fill(&mut self, out: &mut [f32]) {
        for sample in out {
            let splash = self.splash.process(self.random.noise()) * self.splash_gain;
            let noise = self
                .low_pass
                .process(self.high_pass.process(self.random.noise()));
            *sample = (2.4 * noise * (1.0 + 0.3 * splash.clamp(-3.0, 3.0))) as f32;
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Diffuse bed: one of many incoherent elements, wind (gusty low-passed noise) plus a low
// traffic rumble.

pub(crate) struct BedElement {
    sample_rate_hz: f64,
    random: Random,
    wind: [OnePole; 2],
    wind_gain: f64,
    rumble: Biquad,
    rumble_gain: f64,
    gust_hz: f64,
    gust_phase: f64,
    now: u64,
}

impl BedElement {
    pub(crate) fn new(sample_rate_hz: f64, mut random: Random) -> Self {
        let wind = [
            OnePole::new(450.0, sample_rate_hz),
            OnePole::new(450.0, sample_rate_hz),
        ];
        Self {
            sample_rate_hz,
            wind,
            // Two cascaded poles pass a little less than one; the factor is set by ear.
            wind_gain: 1.3 / (wind[0].white_noise_gain() * NOISE_RMS),
            rumble: Biquad::low_pass(90.0, 0.7, sample_rate_hz),
            // RMS of a 90 Hz Butterworth low-pass on white noise ≈ sqrt(π·fc/(2·fs)·2).
            rumble_gain: 0.8 / (NOISE_RMS * (PI * 90.0 / sample_rate_hz).sqrt()),
            gust_hz: random.range(0.07, 0.2),
            gust_phase: random.unit(),
            random,
            now: 0,
        }
    }
}

impl Voice for BedElement {
    fn fill(&mut self, out: &mut [f32]) {
        for sample in out {
            let t_s = self.now as f64 / self.sample_rate_hz;
            let gust = 0.65 + 0.35 * (2.0 * PI * (self.gust_hz * t_s + self.gust_phase)).sin();
            let mut wind = self.random.noise();
            for pole in &mut self.wind {
                wind = pole.process(wind);
            }
            let rumble = self.rumble.process(self.random.noise());
            *sample = (gust * wind * self.wind_gain + rumble * self.rumble_gain) as f32;
            self.now += 1;
        }
    }
}
