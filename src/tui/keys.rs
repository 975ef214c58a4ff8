//! Terminal events to [`Action`]s: a pure function of the event and the state (the state says
//! whether a prompt is taking the keys and which pane a click lands in).
use crossterm::event::{
    Event, KeyCode, KeyEvent, KeyEventKind, KeyModifiers, MouseButton, MouseEvent, MouseEventKind,
};

use super::action::{Action, Pane};
use super::app::{App, Mode};
use super::render;

/// The action for an event, if any.
pub fn action_for(event: &Event, app: &App) -> Option<Action> {
    match event {
        Event::Key(k) if k.kind != KeyEventKind::Release => key(k, app),
        Event::Mouse(m) => mouse(m, app),
        Event::Resize(w, h) => Some(Action::Resize(*w, *h)),
        _ => None,
    }
}

fn key(k: &KeyEvent, app: &App) -> Option<Action> {
    if k.modifiers.contains(KeyModifiers::CONTROL) && matches!(k.code, KeyCode::Char('c')) {
        return Some(Action::Quit);
    }
    match &app.mode {
        Mode::Prompt { .. } => {
            if k.modifiers.contains(KeyModifiers::CONTROL) && k.code == KeyCode::Char('u') {
                return Some(Action::PromptClear);
            }
            return match k.code {
                KeyCode::Enter => Some(Action::PromptSubmit),
                KeyCode::Esc => Some(Action::Cancel),
                KeyCode::Backspace => Some(Action::PromptBackspace),
                KeyCode::Char(c) => Some(Action::PromptChar(c)),
                _ => None,
            };
        }
        Mode::ConfirmOverwrite { .. } => {
            return Some(match k.code {
                KeyCode::Char('y') | KeyCode::Char('Y') => Action::Confirm(true),
                KeyCode::Esc => Action::Cancel,
                _ => Action::Confirm(false),
            })
        }
        Mode::Help => {
            return Some(match k.code {
                KeyCode::Char('q') => Action::Quit,
                _ => Action::ToggleHelp,
            })
        }
        Mode::Normal => {}
    }
    if render::too_small(app.size) {
        // Only quitting makes sense until the terminal is big enough again.
        return matches!(k.code, KeyCode::Char('q') | KeyCode::Esc).then_some(Action::Quit);
    }
    Some(match k.code {
        KeyCode::Char('q') | KeyCode::Esc => Action::Quit,
        KeyCode::Tab => Action::NextPane,
        KeyCode::BackTab => Action::PrevPane,
        KeyCode::Char('1') => Action::ShowPane(Pane::Stock),
        KeyCode::Char('2') => Action::ShowPane(Pane::Board),
        KeyCode::Char('3') => Action::ShowPane(Pane::Fit),
        KeyCode::Char('f') | KeyCode::Enter => Action::FocusDocument,
        KeyCode::Char('w') => Action::WindowDown,
        KeyCode::Char('W') => Action::WindowUp,
        KeyCode::Char('o') => Action::OverlapDown,
        KeyCode::Char('O') => Action::OverlapUp,
        KeyCode::Char('m') => Action::MinChunkDown,
        KeyCode::Char('M') => Action::MinChunkUp,
        KeyCode::Char('b') => Action::BoundaryNext,
        KeyCode::Char('B') => Action::BoundaryPrev,
        KeyCode::Char('t') => Action::TokensNext,
        KeyCode::Char('T') => Action::TokensPrev,
        KeyCode::Char('c') => Action::ContextDown,
        KeyCode::Char('C') => Action::ContextUp,
        KeyCode::Char('a') => Action::ChunksNext,
        KeyCode::Char('A') => Action::ChunksPrev,
        KeyCode::Char('e') => Action::PrecisionNext,
        KeyCode::Char('E') => Action::PrecisionPrev,
        KeyCode::Char('p') => Action::Pin,
        KeyCode::Char('P') => Action::Unpin,
        KeyCode::Char(']') => Action::NextChunk,
        KeyCode::Char('[') => Action::PrevChunk,
        KeyCode::Char('x') => Action::BestChunk,
        KeyCode::Char('r') => Action::NextRef,
        KeyCode::Char('R') => Action::PrevRef,
        KeyCode::Char('s') => Action::Sort,
        KeyCode::Char('>') => Action::SavePrompt,
        KeyCode::Char('<') => Action::LoadPrompt,
        KeyCode::Char('?') => Action::ToggleHelp,
        KeyCode::Up | KeyCode::Char('k') => Action::Move(-1),
        KeyCode::Down | KeyCode::Char('j') => Action::Move(1),
        KeyCode::PageUp => Action::Page(-1),
        KeyCode::PageDown | KeyCode::Char(' ') => Action::Page(1),
        KeyCode::Home | KeyCode::Char('g') => Action::Home,
        KeyCode::End | KeyCode::Char('G') => Action::End,
        _ => return None,
    })
}

fn mouse(m: &MouseEvent, app: &App) -> Option<Action> {
    if app.mode != Mode::Normal || render::too_small(app.size) {
        return None;
    }
    let a = render::areas(app.size);
    match m.kind {
        MouseEventKind::ScrollDown => Some(Action::Move(3)),
        MouseEventKind::ScrollUp => Some(Action::Move(-3)),
        MouseEventKind::Down(MouseButton::Left) => {
            if m.row == a.tabs.y {
                return render::tab_spans()
                    .into_iter()
                    .find(|(x0, x1, _)| (*x0..*x1).contains(&m.column))
                    .map(|(_, _, p)| Action::ShowPane(p));
            }
            if app.pane == Pane::Stock && m.row > a.body.y && m.row < a.body.bottom() {
                let r = app.stock.top + (m.row - a.body.y - 1) as usize;
                return (r < app.stock.order.len()).then_some(Action::SelectRow(r));
            }
            None
        }
        _ => None,
    }
}
