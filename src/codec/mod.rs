//! Codecs written by hand, bit for bit as their references: integer samples in, codes out, and back. They know
//! nothing of stages, chains or files; the stages (hear the codec) and the file writers (store its codes) use them.

pub mod delta;
pub mod g711;
pub mod g721;
pub mod gsm610;
pub mod ima_adpcm;
pub mod ms_adpcm;
pub mod vox;
