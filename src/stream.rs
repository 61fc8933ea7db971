//! Streaming helpers for batch runs: deterministic sharding of an event
//! stream, and an order-preserving, memory-bounded parallel map.

use std::fmt;
use std::str::FromStr;

use rayon::prelude::*;

/// One slice of an event stream for a batch job array: shard `index` of
/// `count` keeps the events whose **ordinal** (0-based position in the
/// whole input stream, across all input files, counting rejected events
/// too) satisfies `ordinal % count == index`.
///
/// Round-robin rather than contiguous blocks: it needs no total count up
/// front (inputs are streamed), and it spreads expensive events evenly.
/// Every event lands in exactly one shard.
///
/// Invariant: `index < count`, `count ≥ 1`.
///
/// ```
/// use quarry::stream::Shard;
/// let s: Shard = "1/3".parse().unwrap();
/// assert!(s.keeps(1) && s.keeps(4) && !s.keeps(3));
/// assert!("3/3".parse::<Shard>().is_err());
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Shard {
    index: u64,
    count: u64,
}

impl Shard {
    /// The whole stream as one shard.
    pub const ALL: Shard = Shard { index: 0, count: 1 };

    /// Shard `index` of `count`; `None` unless `index < count`.
    ///
    /// ```
    /// assert!(quarry::stream::Shard::new(0, 1).is_some());
    /// assert!(quarry::stream::Shard::new(2, 2).is_none());
    /// ```
    pub fn new(index: u64, count: u64) -> Option<Shard> {
        (index < count).then_some(Shard { index, count })
    }

    /// The 0-based shard number.
    pub fn index(&self) -> u64 {
        self.index
    }

    /// The number of shards.
    pub fn count(&self) -> u64 {
        self.count
    }

    /// Whether the event at stream position `ordinal` belongs to this shard.
    pub fn keeps(&self, ordinal: u64) -> bool {
        ordinal % self.count == self.index
    }
}

impl Default for Shard {
    fn default() -> Self {
        Shard::ALL
    }
}

impl fmt::Display for Shard {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

/// Why a shard specification was rejected.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
#[error("shard must be K/N with 0 ≤ K < N (e.g. 0/8), got '{0}'")]
pub struct ShardParseError(pub String);

impl FromStr for Shard {
    type Err = ShardParseError;

    fn from_str(s: &str) -> Result<Shard, ShardParseError> {
        let err = || ShardParseError(s.to_string());
        let (k, n) = s.split_once('/').ok_or_else(err)?;
        let k: u64 = k.trim().parse().map_err(|_| err())?;
        let n: u64 = n.trim().parse().map_err(|_| err())?;
        Shard::new(k, n).ok_or_else(err)
    }
}

/// Events per parallel chunk of a `quarry reco` run unless `--chunk-size`
/// says otherwise.
///
/// Small on purpose: one chunk's raw text, events and result rows (~300 KB
/// at 256 top-pair events) stay in the cores' caches between the reader and
/// the workers. Measured on 2 cores over 1.5 M toy top-pair events
/// (1.09 GB): 256 gave 341-352 k events/s and 19 MB peak memory, 4096 gave
/// 308 k events/s and 62 MB; below 128 the per-chunk hand-over starts to
/// cost.
pub const DEFAULT_CHUNK: usize = 256;

/// Maps `items` through `work` in parallel, `chunk` items at a time, and
/// hands every result to `sink` **in input order**, whatever the number of
/// threads.
///
/// Reading overlaps with work: a separate thread pulls `items` (e.g. parses
/// CSV) into the next chunk while the current chunk is processed on the
/// rayon pool the caller runs in and its results are handed to `sink` on
/// the calling thread. At most three chunks exist at once (being read,
/// queued, being processed), so memory stays bounded on endless streams.
///
/// `init` makes per-thread state for `work` (e.g. a [`crate::Worker`]); it
/// may be called several times per chunk, so it should be cheap relative to
/// a chunk's work.
///
/// `items` yields `Result`s: the first `Err` stops reading; the results of
/// the items before it are still delivered, then the error is returned.
/// An error from `sink` stops the run (reading stops at the end of the
/// chunk being read) and is returned.
///
/// ```
/// use quarry::stream::ordered_chunked_map;
/// let mut out = Vec::new();
/// let items = (0..10).map(Ok::<_, String>);
/// ordered_chunked_map(items, 3, || (), |_, x: u32| x * x, |y| { out.push(y); Ok(()) }).unwrap();
/// assert_eq!(out, [0, 1, 4, 9, 16, 25, 36, 49, 64, 81]);
/// ```
pub fn ordered_chunked_map<T, R, E, St, I, N, W, S>(
    items: I,
    chunk: usize,
    init: N,
    work: W,
    mut sink: S,
) -> Result<(), E>
where
    I: IntoIterator<Item = Result<T, E>>,
    I::IntoIter: Send,
    T: Send,
    R: Send,
    E: Send,
    N: Fn() -> St + Sync,
    W: Fn(&mut St, T) -> R + Sync,
    S: FnMut(R) -> Result<(), E>,
{
    let chunk = chunk.max(1);
    let items = items.into_iter();
    std::thread::scope(|scope| {
        // One chunk may wait in the channel while the reader fills the next.
        let (tx, rx) = std::sync::mpsc::sync_channel::<(Vec<T>, Option<E>)>(1);
        scope.spawn(move || {
            let mut items = items;
            loop {
                let mut buffer = Vec::with_capacity(chunk);
                let mut failure = None;
                while buffer.len() < chunk {
                    match items.next() {
                        Some(Ok(t)) => buffer.push(t),
                        Some(Err(e)) => {
                            failure = Some(e);
                            break;
                        }
                        None => break,
                    }
                }
                let last = failure.is_some() || buffer.len() < chunk;
                if buffer.is_empty() && failure.is_none() {
                    return;
                }
                // A closed channel means the consumer stopped: stop reading.
                if tx.send((buffer, failure)).is_err() || last {
                    return;
                }
            }
        });
        let mut results: Vec<R> = Vec::with_capacity(chunk);
        for (mut buffer, failure) in rx {
            // `collect_into_vec` keeps input order and reuses the allocation.
            buffer
                .par_drain(..)
                .map_init(&init, &work)
                .collect_into_vec(&mut results);
            for r in results.drain(..) {
                sink(r)?;
            }
            if let Some(e) = failure {
                return Err(e);
            }
        }
        Ok(())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shards_partition_the_stream() {
        let shards: Vec<Shard> = (0..4).map(|k| Shard::new(k, 4).unwrap()).collect();
        for ordinal in 0..100u64 {
            assert_eq!(shards.iter().filter(|s| s.keeps(ordinal)).count(), 1);
        }
        assert!(Shard::ALL.keeps(12345));
    }

    #[test]
    fn shard_parsing() {
        assert_eq!("2/5".parse::<Shard>().unwrap(), Shard::new(2, 5).unwrap());
        assert_eq!("2/5".parse::<Shard>().unwrap().to_string(), "2/5");
        for bad in ["", "1", "5/5", "0/0", "-1/3", "a/b", "1/2/3"] {
            assert!(bad.parse::<Shard>().is_err(), "{bad}");
        }
    }

    #[test]
    fn order_is_kept_and_errors_flush_earlier_results() {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(2)
            .build()
            .unwrap();
        let mut out = Vec::new();
        let items = (0..20).map(|i| if i == 13 { Err(i) } else { Ok(i) });
        let r = pool.install(|| {
            ordered_chunked_map(
                items,
                4,
                || (),
                |_, x: i32| x * 10,
                |y| {
                    out.push(y);
                    Ok(())
                },
            )
        });
        assert_eq!(r, Err(13));
        assert_eq!(out, (0..13).map(|x| x * 10).collect::<Vec<_>>());
    }

    #[test]
    fn sink_errors_stop_the_run() {
        let mut seen = 0;
        let r = ordered_chunked_map(
            (0..100).map(Ok::<i32, String>),
            8,
            || (),
            |_, x| x,
            |y| {
                seen += 1;
                if y == 5 {
                    Err("full".to_string())
                } else {
                    Ok(())
                }
            },
        );
        assert_eq!(r, Err("full".into()));
        assert_eq!(seen, 6);
    }
}
