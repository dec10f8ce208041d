//! The prompter on a real terminal (crossterm): wall clock, keyboard, screen.
//!
//! Works in an ordinary terminal and over SSH: it only moves the cursor,
//! prints lines and reads keys. The terminal is put back (main screen,
//! cursor, cooked mode) when the [`TerminalScreen`] is dropped, also on an
//! error.

use super::{render, Clock, Frame, Key, KeySource, Screen, Style};
use crossterm::event::{self, Event, KeyCode, KeyEventKind, KeyModifiers};
use crossterm::style::{Attribute, Print, SetAttribute};
use crossterm::terminal::{self, Clear, ClearType};
use crossterm::{cursor, execute, queue};
use std::io::{Stdout, Write};
use std::time::{Duration, Instant};

/// The wall clock.
#[derive(Debug)]
pub struct WallClock(Instant);

impl WallClock {
    /// A clock starting now.
    pub fn new() -> Self {
        WallClock(Instant::now())
    }
}

impl Default for WallClock {
    fn default() -> Self {
        Self::new()
    }
}

impl Clock for WallClock {
    fn now(&self) -> f64 {
        self.0.elapsed().as_secs_f64()
    }
}

/// Keys from the terminal.
#[derive(Debug, Default)]
pub struct TerminalKeys;

impl KeySource for TerminalKeys {
    fn wait(&mut self, timeout_s: f64) -> std::io::Result<Option<Key>> {
        let until = Instant::now() + Duration::from_secs_f64(timeout_s.max(0.0));
        loop {
            let left = until.saturating_duration_since(Instant::now());
            if !event::poll(left)? {
                return Ok(None);
            }
            if let Event::Key(k) = event::read()? {
                if k.kind != KeyEventKind::Press {
                    continue;
                }
                let key = match k.code {
                    KeyCode::Esc => Some(Key::Abort),
                    KeyCode::Char('c') if k.modifiers.contains(KeyModifiers::CONTROL) => {
                        Some(Key::Abort)
                    }
                    KeyCode::Char(c) => Key::from_char(c),
                    _ => None,
                };
                if key.is_some() {
                    return Ok(key);
                }
            }
            if Instant::now() >= until {
                return Ok(None);
            }
        }
    }
}

/// The terminal screen: alternate screen, raw mode, hidden cursor.
#[derive(Debug)]
pub struct TerminalScreen {
    out: Stdout,
    fill: char,
}

impl TerminalScreen {
    /// Takes over the terminal; `ascii` draws with `#` instead of block characters.
    pub fn new(ascii: bool) -> std::io::Result<Self> {
        terminal::enable_raw_mode()?;
        let mut out = std::io::stdout();
        if let Err(e) = execute!(out, terminal::EnterAlternateScreen, cursor::Hide) {
            let _ = terminal::disable_raw_mode();
            return Err(e);
        }
        Ok(TerminalScreen {
            out,
            fill: if ascii { '#' } else { '█' },
        })
    }
}

impl Screen for TerminalScreen {
    fn draw(&mut self, frame: &Frame) -> std::io::Result<()> {
        let (w, h) = terminal::size().unwrap_or((80, 24));
        let lines = render(frame, w as usize, h as usize, self.fill);
        for (row, l) in lines.iter().enumerate().take(h as usize) {
            queue!(self.out, cursor::MoveTo(0, row as u16))?;
            match l.style {
                Style::Plain => {}
                Style::Bold => queue!(self.out, SetAttribute(Attribute::Bold))?,
                Style::Reverse => queue!(self.out, SetAttribute(Attribute::Reverse))?,
            }
            queue!(
                self.out,
                Print(&l.text),
                SetAttribute(Attribute::Reset),
                Clear(ClearType::UntilNewLine)
            )?;
        }
        queue!(self.out, Clear(ClearType::FromCursorDown))?;
        self.out.flush()
    }
}

impl Drop for TerminalScreen {
    fn drop(&mut self) {
        let _ = execute!(self.out, cursor::Show, terminal::LeaveAlternateScreen);
        let _ = terminal::disable_raw_mode();
    }
}
