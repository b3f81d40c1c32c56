//! The keyboard, read by tankbook itself: a thread reads the terminal's bytes
//! and turns them into [`Key`]s, and says so when the terminal is gone.
//!
//! Why not crossterm's event reader: once its terminal is closed, its reader
//! retries a dead descriptor forever inside `event::poll` (it never returns,
//! even with a timeout), so a program built on it outlives its terminal at
//! 100 % CPU and cannot notice signals. Here a read that returns end of input
//! or an error ends the reader, and the screens' loop (which only waits on a
//! channel with a timeout) ends with it.

use std::io::Read;
use std::sync::mpsc::Sender;

use super::keys::Key;

/// What the reader reports.
#[derive(Debug, Clone, PartialEq)]
pub enum Input {
    Key(Key),
    /// End of input or a read error: the terminal went away.
    Gone(String),
}

/// Starts the reader thread on standard input (the terminal, in raw mode).
pub fn spawn(tx: Sender<Input>) -> std::io::Result<()> {
    std::thread::Builder::new().name("keyboard".into()).spawn(move || {
        // larger than std's stdin buffer, so each read is one read(2) of the terminal
        let mut buf = vec![0u8; 16 * 1024];
        let mut stdin = std::io::stdin().lock();
        loop {
            let why = match stdin.read(&mut buf) {
                Ok(0) => "the terminal was closed (end of input)".to_string(),
                Ok(n) => {
                    if parse(&buf[..n]).into_iter().any(|k| tx.send(Input::Key(k)).is_err()) {
                        return;
                    }
                    continue;
                }
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
                // a hung-up terminal answers EIO
                Err(e) => format!("the terminal was closed ({})", e.to_string().split(" (os error").next().unwrap_or("read error")),
            };
            let _ = tx.send(Input::Gone(why));
            return;
        }
    })?;
    Ok(())
}

/// The keys in one read of the terminal. A terminal sends an escape sequence in
/// one piece, so an ESC that ends the read is the Esc key itself.
pub fn parse(bytes: &[u8]) -> Vec<Key> {
    let mut out = Vec::new();
    let mut i = 0;
    while i < bytes.len() {
        let b = bytes[i];
        i += 1;
        match b {
            0x1b => match bytes.get(i) {
                Some(b'[') | Some(b'O') => {
                    let intro = bytes[i];
                    // parameters and intermediates, then one final byte 0x40–0x7e
                    let start = i + 1;
                    let mut j = start;
                    while j < bytes.len() && !(0x40..=0x7e).contains(&bytes[j]) {
                        j += 1;
                    }
                    let Some(&fin) = bytes.get(j) else {
                        i = bytes.len();
                        continue;
                    };
                    let params = std::str::from_utf8(&bytes[start..j]).unwrap_or("");
                    i = j + 1;
                    if let Some(k) = sequence(intro, params, fin) {
                        out.push(k);
                    }
                }
                _ => out.push(Key::Esc),
            },
            b'\r' | b'\n' => out.push(Key::Enter),
            b'\t' => out.push(Key::Tab),
            0x7f | 0x08 => out.push(Key::Backspace),
            // Ctrl-C: raw mode delivers it as a byte, not as SIGINT
            0x03 => out.push(Key::CtrlC),
            0x00..=0x1f => {}
            _ => {
                // one UTF-8 character
                let len = match b {
                    0xc0..=0xdf => 2,
                    0xe0..=0xef => 3,
                    0xf0..=0xf7 => 4,
                    _ => 1,
                };
                let end = (i - 1 + len).min(bytes.len());
                if let Ok(s) = std::str::from_utf8(&bytes[i - 1..end])
                    && let Some(c) = s.chars().next()
                {
                    out.push(Key::Char(c));
                }
                i = end;
            }
        }
    }
    out
}

/// A CSI (`ESC [`) or SS3 (`ESC O`) sequence; modifiers (`1;5A`) are ignored.
fn sequence(intro: u8, params: &str, fin: u8) -> Option<Key> {
    let first: u32 = params.split(';').next().and_then(|p| p.parse().ok()).unwrap_or(0);
    Some(match (intro, fin) {
        (_, b'A') => Key::Up,
        (_, b'B') => Key::Down,
        (_, b'C') => Key::Right,
        (_, b'D') => Key::Left,
        (_, b'H') => Key::Home,
        (_, b'F') => Key::End,
        (b'[', b'Z') => Key::BackTab,
        (b'O', b'P') => Key::F(1),
        (b'O', b'Q') => Key::F(2),
        (b'O', b'R') => Key::F(3),
        (b'O', b'S') => Key::F(4),
        (b'[', b'~') => match first {
            1 | 7 => Key::Home,
            4 | 8 => Key::End,
            5 => Key::PageUp,
            6 => Key::PageDown,
            11..=15 => Key::F((first - 10) as u8),
            17..=21 => Key::F((first - 11) as u8),
            23 | 24 => Key::F((first - 12) as u8),
            _ => return None,
        },
        _ => return None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keys_from_the_bytes_a_terminal_sends() {
        // xterm's sequences (ECMA-48 CSI and SS3; the numbered keys of the VT220)
        assert_eq!(parse(b"\x1b[A\x1b[B\x1bOC\x1b[1;5D"), vec![Key::Up, Key::Down, Key::Right, Key::Left]);
        assert_eq!(parse(b"\x1b[5~\x1b[6~\x1b[H\x1b[4~\x1b[Z"), vec![Key::PageUp, Key::PageDown, Key::Home, Key::End, Key::BackTab]);
        assert_eq!(parse(b"\x1b[15~\x1bOP"), vec![Key::F(5), Key::F(1)]);
        assert_eq!(parse(b"\x1b"), vec![Key::Esc]);
        assert_eq!(parse(b"a\r\t\x7f"), vec![Key::Char('a'), Key::Enter, Key::Tab, Key::Backspace]);
        assert_eq!(parse("é±".as_bytes()), vec![Key::Char('é'), Key::Char('±')]);
        assert_eq!(parse(b"\x03"), vec![Key::CtrlC]);
        // an unknown or cut-off sequence is dropped, not typed
        assert_eq!(parse(b"\x1b[99~x"), vec![Key::Char('x')]);
        assert_eq!(parse(b"\x1b[1;"), vec![]);
    }
}
