//! Streaming: a multi-megabyte input goes through the iterator one event at
//! a time, without collecting.

use std::io::{self, Read};

use quarry_csv::{EventReader, ReadOptions, Record};

/// Generates rows on the fly, so the test holds no copy of the whole file.
struct Generator {
    event: u64,
    n_events: u64,
    pending: Vec<u8>,
    pos: usize,
    bytes: u64,
}

impl Read for Generator {
    fn read(&mut self, out: &mut [u8]) -> io::Result<usize> {
        if self.pos == self.pending.len() {
            self.pending.clear();
            self.pos = 0;
            if self.event == 0 {
                self.pending
                    .extend_from_slice(b"event,kind,pt,eta,phi,mass,btag,charge,weight\n");
            }
            if self.event >= self.n_events {
                return Ok(0);
            }
            let id = self.event;
            for k in 0..6 {
                self.pending.extend_from_slice(
                    format!("{id},jet,{}.5,0.{k},-1.{k},{k}.25,0.{k},,0.5\n", 30 + k).as_bytes(),
                );
            }
            self.pending
                .extend_from_slice(format!("{id},muon,41.5,-0.3,2.0,0.105,,-1,0.5\n").as_bytes());
            self.pending
                .extend_from_slice(format!("{id},met,55.25,,0.7,,,,0.5\n").as_bytes());
            self.event += 1;
        }
        let n = out.len().min(self.pending.len() - self.pos);
        out[..n].copy_from_slice(&self.pending[self.pos..self.pos + n]);
        self.pos += n;
        self.bytes += n as u64;
        Ok(n)
    }
}

#[test]
fn multi_megabyte_input_streams() {
    let n_events = 20_000;
    let gen = Generator {
        event: 0,
        n_events,
        pending: Vec::new(),
        pos: 0,
        bytes: 0,
    };
    let mut reader =
        EventReader::from_reader(gen, "generated.csv", ReadOptions::default()).unwrap();
    let mut count = 0u64;
    let mut jets = 0usize;
    let mut last_id = None;
    for rec in reader.by_ref() {
        match rec.unwrap() {
            Record::Good(e) => {
                assert_eq!(e.jets.len(), 6);
                assert_eq!(e.muons[0].charge, -1);
                assert_eq!(e.weight, 0.5);
                jets += e.jets.len();
                last_id = Some(e.id);
            }
            Record::Bad(b) => panic!("{b}"),
        }
        count += 1;
    }
    assert_eq!(count, n_events);
    assert_eq!(jets, 6 * n_events as usize);
    assert_eq!(last_id, Some(n_events - 1));
    assert_eq!(reader.summary().rows, 8 * n_events);
    assert_eq!(reader.summary().good, n_events);
}
