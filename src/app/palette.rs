//! The window's colours, for light and dark themes. The project's own choice: a deep teal
//! for the conditional fan, warm grey for the unconditional one and for history, rose for pins
//! (drawn as diamonds), violet for corridors; red and amber only for clashes and strain (rings
//! and edges); blue for the second scenario of a comparison. The legend (`legend.rs`) says so
//! on screen.

use egui::Color32;

#[derive(Debug, Clone, Copy)]
pub struct Palette {
    pub fan: Color32,
    pub stale: Color32,
    pub muted: Color32,
    pub history: Color32,
    pub pin: Color32,
    pub corridor: Color32,
    pub clash: Color32,
    pub strain: Color32,
    pub ok: Color32,
    /// The second scenario of a comparison.
    pub second: Color32,
}

impl Palette {
    pub fn for_theme(dark: bool) -> Palette {
        if dark {
            Palette {
                fan: Color32::from_rgb(64, 178, 184),
                stale: Color32::from_rgb(120, 120, 120),
                muted: Color32::from_rgb(150, 144, 134),
                history: Color32::from_rgb(220, 218, 212),
                pin: Color32::from_rgb(236, 98, 160),
                corridor: Color32::from_rgb(170, 140, 225),
                clash: Color32::from_rgb(235, 85, 70),
                strain: Color32::from_rgb(235, 185, 60),
                ok: Color32::from_rgb(110, 190, 120),
                second: Color32::from_rgb(120, 155, 240),
            }
        } else {
            Palette {
                fan: Color32::from_rgb(24, 112, 120),
                stale: Color32::from_rgb(150, 150, 150),
                muted: Color32::from_rgb(150, 142, 130),
                history: Color32::from_rgb(55, 55, 58),
                pin: Color32::from_rgb(184, 40, 112),
                corridor: Color32::from_rgb(112, 80, 170),
                clash: Color32::from_rgb(192, 48, 36),
                strain: Color32::from_rgb(204, 146, 20),
                ok: Color32::from_rgb(50, 140, 70),
                second: Color32::from_rgb(40, 80, 190),
            }
        }
    }
}
