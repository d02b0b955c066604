//! The progress bar of a reduction: the library reports bytes done through
//! [`ebbwise::run::reduce::Progress`]; this draws them with `indicatif` on stderr.

use std::io::IsTerminal;
use std::sync::OnceLock;

use ebbwise::run::reduce::Progress;

/// Inputs smaller than this finish too quickly for a bar to help.
const MIN_BYTES_FOR_A_BAR: u64 = 8 << 20;

/// A bar on stderr, drawn only when stderr is a terminal and the input is over 8 MiB.
#[derive(Default)]
pub struct TerminalBar {
    bar: OnceLock<indicatif::ProgressBar>,
}

impl Progress for TerminalBar {
    fn start(&self, total_bytes: u64) {
        if total_bytes <= MIN_BYTES_FOR_A_BAR || !std::io::stderr().is_terminal() {
            return;
        }
        let b = indicatif::ProgressBar::new(total_bytes);
        b.set_style(
            indicatif::ProgressStyle::with_template(
                "{bar:40} {bytes}/{total_bytes} {bytes_per_sec} eta {eta}",
            )
            .expect("valid template"),
        );
        let _ = self.bar.set(b);
    }

    fn advance(&self, bytes: u64) {
        if let Some(b) = self.bar.get() {
            b.inc(bytes);
        }
    }

    fn finish(&self) {
        if let Some(b) = self.bar.get() {
            b.finish_and_clear();
        }
    }
}
