//! The language server (`ratewright lsp`): the compiler's checks and
//! knowledge of a mechanism, offered to an editor over the Language Server
//! Protocol on standard input and output.
//!
//! Why a stage: an editor asks many small questions of a text that changes
//! with every keystroke (is it right, what is this name, where is it used,
//! what may come next). Answering them from the same loading, diagnostics
//! and layout code as `check` and `fmt` means the editor never disagrees
//! with the command line.
//!
//! Invariants:
//! - messages are handled one at a time, in the order received; a request
//!   is answered against the text its document had when it was sent (the
//!   changes before it applied, none after), and a request naming a
//!   version is answered against that version's text or refused with
//!   ContentModified, never answered against another text;
//! - every edit sent (formatting, rename, code action) names the document
//!   version it was computed from, so a client refuses it on other text;
//! - diagnostics are those of [`crate::model::load_with`], the load of
//!   `check`, converted only in position (bytes → UTF-16 line and column);
//! - nothing here panics on any text; a handler that would is caught, its
//!   request answered with an error, and the server goes on;
//! - nothing is written to standard output but protocol messages: with
//!   `cli`, this is the one stage that talks to the outside, and it does so
//!   only through the connection it is given at the start.

mod actions;
mod analysis;
mod completion;
mod convert;
mod diagnostics;
mod document;
mod formatting;
mod hover;
mod navigate;
mod outline;
mod requests;
mod server;
mod workspace;

pub use server::run;
