//! The words people read, defined once for the editor, the report, the summary and the findings.
//!
//! One name per concept: every front end formats through these helpers, so that "louder than W",
//! a channel's number, a direction word or the caution read the same everywhere.
//! Machine identifiers (finding codes such as `over-omni`, JSON field names) are not here: they
//! are a stable contract documented with the JSON.

/// The one wording of the caution shown by the editor, the report and the README.
pub const CAUTION: &str = "Monitoring loud material can damage hearing: keep the listening level \
moderate. These meters do not replace a calibrated monitoring chain. Loudness and peak limits for a \
delivery are set by its specification and by local regulations; Fieldglass reports, it does not \
certify.";

/// The built-in demo scene, named the same way everywhere.
pub const DEMO_SCENE: &str = "demo scene (harbour-front terrace at dusk, synthesised)";

/// A channel whose short-window level, after conversion to SN3D, exceeds W's by more than the
/// tolerance. Finding code `over-omni`.
pub const LOUDER_THAN_W: &str = "louder than W";

/// Figures over everything analysed since the start (or the last reset), as opposed to the
/// short window of the live view.
pub const WHOLE_PROGRAMME: &str = "whole programme";

/// Direction words on the map's axes: azimuth 0° / +90° / −90° / 180°, elevation +90° / −90°.
pub const FRONT: &str = "front";
pub const LEFT: &str = "left";
pub const RIGHT: &str = "right";
pub const BACK: &str = "back";
pub const UP: &str = "up";
pub const DOWN: &str = "down";

/// Grid lines over every map (editor and report), degrees of azimuth and of elevation.
pub const GRID_STEP_DEG: f64 = 30.0;

/// How a channel is named for people: 1-based in file (or host) order, with its ACN in
/// parentheses ("channel 7 (ACN 6)"); a non-spatial channel is "channel 17 (extra)".
pub fn channel_label(input_index: usize, acn: Option<usize>) -> String {
    match acn {
        Some(acn) => format!("channel {} (ACN {acn})", input_index + 1),
        None => format!("channel {} (extra)", input_index + 1),
    }
}

/// Several channels: "channels 3 (ACN 2), 4 (ACN 3)"; one channel as [`channel_label`].
/// `acn_of` maps an input index to its ACN (None for extra channels).
pub fn channel_list(inputs: &[usize], acn_of: impl Fn(usize) -> Option<usize>) -> String {
    match inputs {
        [] => String::new(),
        [one] => channel_label(*one, acn_of(*one)),
        _ => {
            let items: Vec<String> = inputs
                .iter()
                .map(|&i| match acn_of(i) {
                    Some(acn) => format!("{} (ACN {acn})", i + 1),
                    None => format!("{} (extra)", i + 1),
                })
                .collect();
            format!("channels {}", items.join(", "))
        }
    }
}

/// The likelihood of a format hypothesis, 0 … 1, as people read it: "97 % likely".
pub fn likelihood(probability: f64) -> String {
    format!("{:.0} % likely", 100.0 * probability.clamp(0.0, 1.0))
}

/// Whole degrees without a "-0".
pub fn degrees(value_deg: f64) -> String {
    let rounded = value_deg.round();
    let rounded = if rounded == 0.0 { 0.0 } else { rounded };
    format!("{rounded:.0}")
}

/// "az -35°, el 0°": the direction text of readouts, markers and tables.
pub fn direction(azimuth_deg: f64, elevation_deg: f64) -> String {
    format!(
        "az {}°, el {}°",
        degrees(azimuth_deg),
        degrees(elevation_deg)
    )
}

/// The word under an azimuth grid line, if it has one (0, ±90, 180).
pub fn azimuth_word(azimuth_deg: f64) -> Option<&'static str> {
    let a = azimuth_deg.rem_euclid(360.0);
    match a.round() as i64 {
        0 | 360 => Some(FRONT),
        90 => Some(LEFT),
        180 => Some(BACK),
        270 => Some(RIGHT),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn channels_are_counted_from_one_with_their_acn() {
        assert_eq!(channel_label(6, Some(6)), "channel 7 (ACN 6)");
        assert_eq!(channel_label(16, None), "channel 17 (extra)");
        // FuMa file order: the fifth file channel (R) is ACN 6.
        assert_eq!(channel_label(4, Some(6)), "channel 5 (ACN 6)");
        assert_eq!(channel_list(&[2, 3], Some), "channels 3 (ACN 2), 4 (ACN 3)");
        assert_eq!(channel_list(&[16], |_| None), "channel 17 (extra)");
    }

    #[test]
    fn words_and_numbers_read_one_way() {
        assert_eq!(likelihood(0.9704), "97 % likely");
        assert_eq!(direction(-35.2, -0.3), "az -35°, el 0°");
        assert_eq!(direction(179.6, 45.0), "az 180°, el 45°");
        assert_eq!(azimuth_word(-90.0), Some(RIGHT));
        assert_eq!(azimuth_word(180.0), Some(BACK));
        assert_eq!(azimuth_word(-180.0), Some(BACK));
        assert_eq!(azimuth_word(45.0), None);
    }
}
