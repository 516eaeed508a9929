//! Manual check: the firmware answers in QEMU (`cargo run -p isochor-sim --example qemu_smoke [mps2]`).
use isochor_core::auth::Secret;
use isochor_sim::firmware::{self, Board, Build, Qemu};
use isochor_sim::link::Client;
use std::time::Duration;
fn main() {
    let board = if std::env::args().nth(1).as_deref() == Some("mps2") {
        Board::Mps2An386
    } else {
        Board::Microbit
    };
    let dir = firmware::default_firmware_dir();
    let b = Build::standard(board);
    let elf = firmware::build(&dir, &b, &["isochor-firmware"]).unwrap();
    println!("{:?}", isochor_sim::image::image_size(&elf).unwrap());
    let secret = Secret::new([3; 32]);
    let q = Qemu::start(board, &elf, Some((42, &secret)), Duration::from_secs(30)).unwrap();
    let mut c = Client::new(q.connection().unwrap(), Duration::from_secs(3)).with_secret(secret);
    println!("ping {:?}", c.ping(1));
    println!("id {:?}", c.identity());
    println!("diag {:?}", c.diagnostics());
    println!("unsolicited {:?}", c.take_unsolicited());
    println!(
        "clear {:?}",
        c.signed(isochor_core::link::Command::ClearAlarms)
    );
}
