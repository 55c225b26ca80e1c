//! The engine: which instrument answers to which currency (`relevance`),
//! how long each release's window lasts (`windows`), and which trades meet
//! which windows (`exposure`). Depends only on `import`.

#[allow(missing_docs)] // not yet documented item by item (issue 17)
pub mod exposure;
pub mod relevance;
#[allow(missing_docs)] // not yet documented item by item (issue 17)
pub mod windows;
