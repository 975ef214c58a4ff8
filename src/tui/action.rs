//! Everything that can happen to the explorer, as data: key presses and mouse events become
//! actions in [`crate::tui::keys`], worker reports arrive as [`Action::Worker`].
use super::worker::Report;

/// The three panes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Pane {
    /// Document list with budget bars.
    Stock,
    /// Document text with chunk boundaries drawn.
    Board,
    /// References against documents, current plan against the comparison plan.
    Fit,
}

impl Pane {
    /// Every pane in Tab order.
    pub const ALL: [Pane; 3] = [Pane::Stock, Pane::Board, Pane::Fit];
    /// Title shown in the tab bar.
    pub fn title(self) -> &'static str {
        match self {
            Pane::Stock => "Stock",
            Pane::Board => "Board",
            Pane::Fit => "Fit",
        }
    }
}

/// One change the user (or the worker) asks for.
#[derive(Debug, Clone, PartialEq)]
pub enum Action {
    /// Leave the explorer.
    Quit,
    /// Next pane (Tab).
    NextPane,
    /// Previous pane (Shift-Tab).
    PrevPane,
    /// Show one pane.
    ShowPane(Pane),
    /// Open the selected document in the Board.
    FocusDocument,
    /// Window one step smaller / larger.
    WindowDown,
    /// Window one step larger.
    WindowUp,
    /// Overlap one step smaller.
    OverlapDown,
    /// Overlap one step larger.
    OverlapUp,
    /// Minimum last-chunk size one step smaller.
    MinChunkDown,
    /// Minimum last-chunk size one step larger.
    MinChunkUp,
    /// Next boundary rule.
    BoundaryNext,
    /// Previous boundary rule.
    BoundaryPrev,
    /// Next token pooling.
    TokensNext,
    /// Previous token pooling.
    TokensPrev,
    /// Late-chunking context one step smaller (0: chunks encoded alone).
    ContextDown,
    /// Late-chunking context one step larger.
    ContextUp,
    /// Next chunk aggregation.
    ChunksNext,
    /// Previous chunk aggregation.
    ChunksPrev,
    /// Next precision of the forward pass.
    PrecisionNext,
    /// Previous precision of the forward pass.
    PrecisionPrev,
    /// Compare against the current plan from now on.
    Pin,
    /// Compare against the truncation baseline again.
    Unpin,
    /// Move the selection (Stock) or scroll (Board) by lines; negative is up.
    Move(isize),
    /// One page up or down.
    Page(isize),
    /// To the top.
    Home,
    /// To the end.
    End,
    /// Select a document by its row in the Stock list (mouse click).
    SelectRow(usize),
    /// Next chunk in the Board.
    NextChunk,
    /// Previous chunk in the Board.
    PrevChunk,
    /// Scroll the Board to the chunk best matching the selected reference.
    BestChunk,
    /// Next reference.
    NextRef,
    /// Previous reference.
    PrevRef,
    /// Next sort order of the Stock list.
    Sort,
    /// Ask for a file name to save the plan to.
    SavePrompt,
    /// Ask for a profile to load.
    LoadPrompt,
    /// A character typed into the prompt.
    PromptChar(char),
    /// Backspace in the prompt.
    PromptBackspace,
    /// Ctrl-U in the prompt: clear the line.
    PromptClear,
    /// Enter in the prompt.
    PromptSubmit,
    /// Answer to "overwrite?": true for yes.
    Confirm(bool),
    /// Esc in a prompt or overlay.
    Cancel,
    /// Show or hide the help overlay.
    ToggleHelp,
    /// The terminal has a new size (columns, rows).
    Resize(u16, u16),
    /// A report from the embedding worker.
    Worker(Report),
}
