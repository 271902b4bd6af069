//! The document splitter and the whole pipeline on arbitrary text: no
//! panic, and a rendering always strips back to its source.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|text: &str| {
    let _ = covey::document::strip(text);
    let world = covey::world::MemoryWorld::new().with("d.csv", "g,x,y\nA,1,2\nB,2,3\nA,3,5\nB,4,4\n");
    if let Ok(run) = covey::pipeline::run(text, "doc.md", &world, covey::pipeline::RunOptions::default()) {
        assert_eq!(covey::document::strip(&run.rendered).ok().as_deref(), Some(text));
    }
});
