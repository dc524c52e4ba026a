//! (in progress) map → RGBA rendering with a perceptually uniform palette.
