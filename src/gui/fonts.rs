//! Fallback fonts for labels in every script.
//!
//! egui ships fonts for Latin, Greek, Cyrillic and (monochrome) emoji only. At start the
//! workbench looks for system fonts with `fontdb` and appends, after egui's own fonts, one
//! face per script the bundled fonts lack (CJK, Hangul, Hebrew, Arabic, Devanagari, Thai, ...):
//! first a well-known family (Noto, DejaVu, WenQuanYi, Droid Sans Fallback), else any regular
//! face whose character map covers the script's sample letters (checked with `skrifa`). Scripts
//! still without a font are named in one status-bar line with how to install one.
//!
//! What egui does not do, whatever the font: it has no bidirectional algorithm (Unicode
//! UAX #9) and no shaping, so Hebrew and Arabic letters are laid out left to right in the
//! order stored, and Arabic letters keep their isolated forms; see [`display_label`].

use std::collections::BTreeSet;
use std::sync::Arc;

use egui::{FontData, FontDefinitions, FontFamily};
use skrifa::MetadataProvider;

/// A script the workbench tries to show, with letters that must all be covered.
#[derive(Debug, Clone, Copy)]
pub struct Script {
    /// Name shown to the user.
    pub name: &'static str,
    /// Sample letters.
    pub samples: &'static str,
    /// Family names tried first, best first.
    pub preferred: &'static [&'static str],
}

/// The scripts looked for, in the order fonts are added.
pub const SCRIPTS: [Script; 9] = [
    Script {
        name: "Chinese/Japanese (CJK)",
        samples: "多肉植物のサボテン园艺",
        preferred: &[
            "Noto Sans CJK JP",
            "Noto Sans CJK SC",
            "Noto Sans CJK TC",
            "Source Han Sans",
            "WenQuanYi Micro Hei",
            "WenQuanYi Zen Hei",
            "Droid Sans Fallback",
            "Hiragino Sans",
            "Microsoft YaHei",
            "Yu Gothic",
        ],
    },
    Script {
        name: "Korean (Hangul)",
        samples: "정원",
        preferred: &[
            "Noto Sans CJK KR",
            "Noto Sans KR",
            "NanumGothic",
            "Malgun Gothic",
            "Droid Sans Fallback",
        ],
    },
    Script {
        name: "Cyrillic",
        samples: "Сад",
        preferred: &["DejaVu Sans", "Noto Sans", "Liberation Sans"],
    },
    Script {
        name: "Greek",
        samples: "Κήπος",
        preferred: &["DejaVu Sans", "Noto Sans", "Liberation Sans"],
    },
    Script {
        name: "Hebrew",
        samples: "גינה",
        preferred: &["Noto Sans Hebrew", "DejaVu Sans", "FreeSans", "Arial"],
    },
    Script {
        name: "Arabic",
        samples: "حديقة",
        preferred: &[
            "Noto Sans Arabic",
            "Noto Naskh Arabic",
            "DejaVu Sans",
            "Arial",
        ],
    },
    Script {
        name: "Devanagari",
        samples: "बगीचा",
        preferred: &[
            "Noto Sans Devanagari",
            "Lohit Devanagari",
            "FreeSans",
            "Mangal",
        ],
    },
    Script {
        name: "Thai",
        samples: "สวน",
        preferred: &["Noto Sans Thai", "Loma", "Garuda", "Tahoma"],
    },
    Script {
        name: "Emoji",
        samples: "🌵🌱",
        preferred: &["Noto Emoji", "Symbola", "DejaVu Sans"],
    },
];

/// What [`fallback_definitions`] found.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct FontReport {
    /// Scripts egui's bundled fonts already show.
    pub bundled: Vec<&'static str>,
    /// Scripts shown with a system font: (script, family).
    pub added: Vec<(&'static str, String)>,
    /// Scripts no font was found for.
    pub missing: Vec<&'static str>,
}

impl FontReport {
    /// The status-bar line for missing scripts (`None` when every script can be shown).
    pub fn status_line(&self) -> Option<String> {
        (!self.missing.is_empty()).then(|| {
            format!(
                "No font found for labels in {}: they show as boxes. Install fonts and restart \
                 (Debian/Ubuntu: apt install fonts-noto-core fonts-noto-cjk; other systems: any \
                 Noto font for the script).",
                self.missing.join(", ")
            )
        })
    }
}

fn covers(data: &[u8], index: u32, samples: &str) -> bool {
    let Ok(font) = skrifa::FontRef::from_index(data, index) else {
        return false;
    };
    let map = font.charmap();
    samples.chars().all(|c| map.map(c).is_some())
}

/// Color emoji fonts are bitmap (CBDT/sbix) or layered; egui draws outlines only.
fn unusable(family: &str) -> bool {
    family.contains("Color Emoji") || family.contains("Apple Color")
}

/// egui's default fonts plus, for every script they lack, a system font found in `db`.
pub fn fallback_definitions(db: &fontdb::Database) -> (FontDefinitions, FontReport) {
    let mut defs = FontDefinitions::default();
    let mut report = FontReport::default();
    let bundled: Vec<Arc<FontData>> = defs.font_data.values().cloned().collect();
    let mut added_faces: BTreeSet<fontdb::ID> = BTreeSet::new();
    let mut added_data: Vec<(fontdb::ID, Arc<FontData>)> = Vec::new();
    for script in SCRIPTS {
        let covered_by = |fd: &FontData| covers((*fd.font).as_ref(), fd.index, script.samples);
        if bundled.iter().any(|f| covered_by(f)) || added_data.iter().any(|(_, f)| covered_by(f)) {
            if !bundled.iter().any(|f| covered_by(f)) {
                // an already added font shows it too
                let (id, _) = added_data.iter().find(|(_, f)| covered_by(f)).unwrap();
                let fam = db
                    .face(*id)
                    .and_then(|f| f.families.first().map(|x| x.0.clone()))
                    .unwrap_or_default();
                report.added.push((script.name, fam));
            } else {
                report.bundled.push(script.name);
            }
            continue;
        }
        let regular = |f: &fontdb::FaceInfo| {
            f.style == fontdb::Style::Normal && f.weight == fontdb::Weight::NORMAL
        };
        let family_of =
            |f: &fontdb::FaceInfo| f.families.first().map(|x| x.0.clone()).unwrap_or_default();
        let by_name = script.preferred.iter().find_map(|name| {
            let mut faces: Vec<&fontdb::FaceInfo> = db
                .faces()
                .filter(|f| f.families.iter().any(|(n, _)| n == name))
                .collect();
            faces.sort_by_key(|f| !regular(f));
            faces.into_iter().find(|f| {
                db.with_face_data(f.id, |d, i| covers(d, i, script.samples))
                    .unwrap_or(false)
            })
        });
        let face = by_name.or_else(|| {
            db.faces().filter(|f| regular(f)).find(|f| {
                !unusable(&family_of(f))
                    && db
                        .with_face_data(f.id, |d, i| covers(d, i, script.samples))
                        .unwrap_or(false)
            })
        });
        let Some(face) = face else {
            report.missing.push(script.name);
            continue;
        };
        let family = family_of(face);
        if added_faces.insert(face.id)
            && let Some(fd) = db.with_face_data(face.id, |d, i| {
                let mut fd = FontData::from_owned(d.to_vec());
                fd.index = i;
                fd
            })
        {
            let key = format!("system: {family} #{}", added_data.len());
            let fd = Arc::new(fd);
            defs.font_data.insert(key.clone(), fd.clone());
            for fam in [FontFamily::Proportional, FontFamily::Monospace] {
                defs.families.entry(fam).or_default().push(key.clone());
            }
            added_data.push((face.id, fd));
        }
        report.added.push((script.name, family));
    }
    (defs, report)
}

/// Look for system fonts and install the fallbacks into `ctx`. Returns what was found.
pub fn install(ctx: &egui::Context) -> FontReport {
    let mut db = fontdb::Database::new();
    db.load_system_fonts();
    let (defs, report) = fallback_definitions(&db);
    ctx.set_fonts(defs);
    report
}

/// Whether `c` is a strong right-to-left letter (Hebrew, Arabic, Syriac, Thaana, NKo,
/// Samaritan, Mandaic and their presentation forms; UAX #9 bidi classes R and AL by block).
pub fn is_rtl(c: char) -> bool {
    matches!(c as u32,
        0x0590..=0x08FF | 0xFB1D..=0xFDFF | 0xFE70..=0xFEFF | 0x10800..=0x10FFF | 0x1E800..=0x1EFFF)
}

/// A label as the lists show it. egui lays text out left to right in stored order, so a
/// right-to-left run would read backwards; every maximal run of right-to-left letters (with
/// the spaces and marks between them) is reversed into visual order, and the run stays
/// inside its label: nothing moves across neighbouring text, which is what Unicode's
/// isolates (FSI … PDI, UAX #9) would give in a bidi-aware renderer. Labels without
/// right-to-left letters are returned unchanged. Arabic letters still show unjoined
/// (no shaping).
pub fn display_label(label: &str) -> std::borrow::Cow<'_, str> {
    if !label.chars().any(is_rtl) {
        return std::borrow::Cow::Borrowed(label);
    }
    let chars: Vec<char> = label.chars().collect();
    let mut out = String::with_capacity(label.len());
    let mut i = 0;
    while i < chars.len() {
        if is_rtl(chars[i]) {
            // extend over RTL letters and neutral spaces/marks followed by more RTL letters
            let mut j = i + 1;
            let mut end = i + 1;
            while j < chars.len() {
                let c = chars[j];
                if is_rtl(c) {
                    end = j + 1;
                } else if !(c == ' ' || is_mark(c)) {
                    break;
                }
                j += 1;
            }
            // keep combining marks after their base: reverse by clusters
            let mut clusters: Vec<String> = Vec::new();
            for &c in &chars[i..end] {
                if is_mark(c) && !clusters.is_empty() {
                    clusters.last_mut().unwrap().push(c);
                } else {
                    clusters.push(c.to_string());
                }
            }
            for cl in clusters.iter().rev() {
                out.push_str(cl);
            }
            i = end;
        } else {
            out.push(chars[i]);
            i += 1;
        }
    }
    std::borrow::Cow::Owned(out)
}

fn is_mark(c: char) -> bool {
    // Hebrew points and Arabic harakat (general category Mn in these blocks)
    matches!(c as u32, 0x0591..=0x05C7 | 0x0610..=0x061A | 0x064B..=0x065F | 0x0670)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn latin_labels_are_untouched_and_rtl_runs_read_in_visual_order() {
        assert!(matches!(
            display_label("peat free compost"),
            std::borrow::Cow::Borrowed(_)
        ));
        // "נבטים" (sprouts) stored נ ב ט י ם; drawn left to right it must come out ם י ט ב נ
        assert_eq!(display_label("נבטים"), "םיטבנ");
        // the run stays in place between its Latin neighbours
        assert_eq!(display_label("seeds נבטים 🌵"), "seeds םיטבנ 🌵");
        // two words: the whole run is reversed, words swap places (UAX #9 rule L2)
        assert_eq!(display_label("אב גד"), "דג בא");
    }

    #[test]
    fn the_missing_line_names_the_scripts() {
        let r = FontReport {
            missing: vec!["Thai", "Hebrew"],
            ..Default::default()
        };
        let l = r.status_line().unwrap();
        assert!(l.contains("Thai, Hebrew") && l.contains("fonts-noto"));
        assert_eq!(FontReport::default().status_line(), None);
    }
}
