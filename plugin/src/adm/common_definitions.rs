//! The HOA part of the ADM common definitions (ITU-R BS.2094), which a `chna` chunk may reference
//! by ID without any `axml`.
//!
//! Covered: the 3D HOA channel formats and their track and stream formats —
//! `AC_000400xx` SN3D and `AC_000401xx` N3D in ACN order (xx = ACN + 1, hex, ACN 0 … 120, orders
//! 0 … 10), `AC_000402xx` FuMa (xx = 1 … 16 in ACN order, orders 0 … 3) — with the track format
//! `AT_0004yyyy_01` → stream `AS_0004yyyy` → channel `AC_0004yyyy`; and the packs
//! `AP_0004000N` (3D order N SN3D ACN, N = 1 … 6), `AP_0004001N` (N3D) and `AP_0004002N`
//! (FuMa, N = 1 … 3). Not covered: the 2D and mixed-order packs (`AP_000401xx` … `AP_000403xx`).
//! The ranges were read from the BS.2094 table shipped with the EBU ADM Renderer (PyPI `ear`
//! 2.1.0, `ear/fileio/adm/data/2094_common_definitions.xml`) and are checked against that file
//! by `tests/reference-scripts/adm_common_definitions.py`.

use super::DeclaredNormalization;

/// (order, degree, normalization) of a common HOA channel format ID ("AC_00040005").
pub fn channel_format(id: &str) -> Option<(usize, i32, DeclaredNormalization)> {
    let hex = id.strip_prefix("AC_0004")?;
    channel_from_hex(hex)
}

/// Channel format of a common track format ID ("AT_00040005_01").
pub fn track_format(id: &str) -> Option<(usize, i32, DeclaredNormalization)> {
    let rest = id.strip_prefix("AT_0004")?;
    let (hex, suffix) = rest.split_once('_')?;
    (suffix == "01").then_some(())?;
    channel_from_hex(hex)
}

/// (name, order, normalization) of a common 3D HOA pack ID ("AP_00040003").
pub fn pack_format(id: &str) -> Option<(String, usize, DeclaredNormalization)> {
    let hex = id.strip_prefix("AP_0004")?;
    let code = u16::from_str_radix(hex, 16)
        .ok()
        .filter(|_| hex.len() == 4)?;
    let (normalization, order) = match code {
        0x0001..=0x0006 => (DeclaredNormalization::Sn3d, code as usize),
        0x0011..=0x0016 => (DeclaredNormalization::N3d, (code - 0x10) as usize),
        0x0021..=0x0023 => (DeclaredNormalization::Fuma, (code - 0x20) as usize),
        _ => return None,
    };
    let name = match normalization {
        DeclaredNormalization::Fuma => format!("3D_order{order}_FuMa"),
        n => format!("3D_order{order}_{}_ACN", n.label()),
    };
    Some((name, order, normalization))
}

fn channel_from_hex(hex: &str) -> Option<(usize, i32, DeclaredNormalization)> {
    if hex.len() != 4 {
        return None;
    }
    let code = u16::from_str_radix(hex, 16).ok()?;
    let (normalization, index) = match code {
        0x0001..=0x0079 => (DeclaredNormalization::Sn3d, code - 1),
        0x0101..=0x0179 => (DeclaredNormalization::N3d, code - 0x101),
        0x0201..=0x0210 => (DeclaredNormalization::Fuma, code - 0x201),
        _ => return None,
    };
    let acn = index as usize;
    let order = (acn as f64).sqrt().floor() as usize;
    let degree = acn as i32 - (order * order + order) as i32;
    Some((order, degree, normalization))
}

/// The common channel format ID of (ACN, normalization): the inverse of [`channel_format`].
pub fn channel_format_id(acn: usize, normalization: DeclaredNormalization) -> String {
    let base = match normalization {
        DeclaredNormalization::Sn3d => 0x0001,
        DeclaredNormalization::N3d => 0x0101,
        DeclaredNormalization::Fuma => 0x0201,
    };
    format!("AC_0004{:04x}", base + acn)
}

#[cfg(test)]
mod tests {
    use super::*;

    // Entries of the BS.2094 table as shipped in `ear` 2.1.0 (2094_common_definitions.xml).
    #[test]
    fn ids_match_the_published_table() {
        assert_eq!(
            channel_format("AC_00040001"),
            Some((0, 0, DeclaredNormalization::Sn3d))
        );
        assert_eq!(
            channel_format("AC_00040002"),
            Some((1, -1, DeclaredNormalization::Sn3d))
        );
        assert_eq!(
            channel_format("AC_00040010"),
            Some((3, 3, DeclaredNormalization::Sn3d))
        );
        assert_eq!(
            channel_format("AC_00040079"),
            Some((10, 10, DeclaredNormalization::Sn3d))
        );
        assert_eq!(
            channel_format("AC_00040103"),
            Some((1, 0, DeclaredNormalization::N3d))
        );
        // FuMa_X is (1, 1) and FuMa_Q (3, −3) in the table.
        assert_eq!(
            channel_format("AC_00040204"),
            Some((1, 1, DeclaredNormalization::Fuma))
        );
        assert_eq!(
            channel_format("AC_0004020a"),
            Some((3, -3, DeclaredNormalization::Fuma))
        );
        assert_eq!(channel_format("AC_00040211"), None);
        assert_eq!(
            track_format("AT_00040005_01"),
            Some((2, -2, DeclaredNormalization::Sn3d))
        );
        assert_eq!(track_format("AT_00040005_02"), None);
        assert_eq!(
            pack_format("AP_00040003"),
            Some(("3D_order3_SN3D_ACN".into(), 3, DeclaredNormalization::Sn3d))
        );
        assert_eq!(
            pack_format("AP_00040012"),
            Some(("3D_order2_N3D_ACN".into(), 2, DeclaredNormalization::N3d))
        );
        assert_eq!(
            pack_format("AP_00040021"),
            Some(("3D_order1_FuMa".into(), 1, DeclaredNormalization::Fuma))
        );
        assert_eq!(pack_format("AP_00040111"), None);
        for acn in 0..121 {
            for n in [DeclaredNormalization::Sn3d, DeclaredNormalization::N3d] {
                let (order, degree, got) = channel_format(&channel_format_id(acn, n)).unwrap();
                assert_eq!((order * order + order) as i32 + degree, acn as i32);
                assert_eq!(got, n);
            }
        }
    }
}
