//! Where each part of the explorer's screen goes, for a terminal size. Both `update` (which
//! wraps the Board's text to its width and pages by its rows) and drawing read it, so what is
//! computed and what is drawn agree; neither imports the other.
use ratatui::layout::Rect;

/// The smallest terminal the explorer draws in (columns, rows).
pub const MIN_SIZE: (u16, u16) = (60, 16);
/// Columns of the Board's gutter (chunk index and token count).
pub const GUTTER: u16 = 11;
pub const HEADER_ROWS: u16 = 3;

/// Where each part of the screen goes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Areas {
    /// Plan, totals, progress.
    pub header: Rect,
    /// Pane names.
    pub tabs: Rect,
    /// The pane.
    pub body: Rect,
    /// Prompt, messages, key hints.
    pub status: Rect,
}

/// Split a terminal of `size` (columns, rows) into the explorer's areas.
pub fn areas(size: (u16, u16)) -> Areas {
    let (w, h) = size;
    let row = |y: u16, height: u16| Rect::new(0, y.min(h), w, height.min(h.saturating_sub(y)));
    let body_h = h.saturating_sub(HEADER_ROWS + 2);
    Areas {
        header: row(0, HEADER_ROWS),
        tabs: row(HEADER_ROWS, 1),
        body: row(HEADER_ROWS + 1, body_h),
        status: row(h.saturating_sub(1), 1),
    }
}

/// Text columns of the Board for a terminal size (gutter and scroll bar taken off).
pub fn board_text_width(size: (u16, u16)) -> usize {
    size.0.saturating_sub(GUTTER + 1).max(1) as usize
}

/// True when the terminal is too small to draw the explorer.
pub fn too_small(size: (u16, u16)) -> bool {
    size.0 < MIN_SIZE.0 || size.1 < MIN_SIZE.1
}

/// Visible Board rows for a terminal size (the document title takes one).
pub fn board_rows(size: (u16, u16)) -> usize {
    areas(size).body.height.saturating_sub(1) as usize
}
