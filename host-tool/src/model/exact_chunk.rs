//! A chunk of a row of code pairs as the exact model answered it, one
//! array a quantity: what exhaustive verification reads
//! ([`crate::model::exact::ExactRow::fill`]). Arrays keep the checks' loops
//! short and free of the model's `Option`s.

/// Code pairs in a chunk.
pub const CHUNK: usize = 256;

/// The model's answers at up to [`CHUNK`] consecutive current codes of a
/// row; slot `k` is current code `first + k` of the fill.
#[derive(Debug, Clone)]
pub struct ExactChunk {
    /// Pairs filled.
    pub n: usize,
    /// The model answered, with finite numbers (else the pair is a
    /// refusal and the other slots say nothing).
    pub ok: [bool; CHUNK],
    /// [`crate::model::exact::ExactPoint::ticks`]: the aim, ticks.
    pub ticks: [f64; CHUNK],
    /// [`crate::model::exact::ExactPoint::nominal_ticks`], ticks.
    pub nominal: [f64; CHUNK],
    /// ZVS is possible: `open` and `close` hold the window, second.
    pub zvs: [bool; CHUNK],
    /// The window opens, second from the turn-off command.
    pub open: [f64; CHUNK],
    /// The window closes, second.
    pub close: [f64; CHUNK],
    /// A robust window: `r_open` and `r_close` hold it, second.
    pub robust: [bool; CHUNK],
    /// The robust window opens, second.
    pub r_open: [f64; CHUNK],
    /// The robust window closes, second.
    pub r_close: [f64; CHUNK],
    /// [`crate::model::exact::ExactPoint::model_eps_ticks`]: the bound of every time, ticks.
    pub eps: [f64; CHUNK],
    /// Scratch for the load grid's answers, kept between fills (`None`
    /// while a fill holds it).
    pub loads: Option<Box<crate::tank::load_grid::LoadBatch>>,
}

impl ExactChunk {
    /// An empty chunk (on the heap: 32 kB).
    #[must_use]
    pub fn new() -> Box<Self> {
        Box::new(Self {
            n: 0,
            ok: [false; CHUNK],
            ticks: [0.0; CHUNK],
            nominal: [0.0; CHUNK],
            zvs: [false; CHUNK],
            open: [0.0; CHUNK],
            close: [0.0; CHUNK],
            robust: [false; CHUNK],
            r_open: [0.0; CHUNK],
            r_close: [0.0; CHUNK],
            eps: [0.0; CHUNK],
            loads: Some(Box::default()),
        })
    }

    /// Slot `k` a refusal.
    #[inline(always)]
    pub fn refuse(&mut self, k: usize) {
        if let Some(ok) = self.ok.get_mut(k) {
            *ok = false;
        }
    }

    /// Slot `k`: aim and nominal aim (ticks), window and robust window
    /// (second), bound (ticks); a refusal if any is not finite.
    #[inline(always)]
    pub fn put(
        &mut self,
        k: usize,
        ticks: f64,
        nominal: f64,
        window: Option<(f64, f64)>,
        robust: Option<(f64, f64)>,
        eps_ticks: f64,
    ) {
        let (open, close) = window.unwrap_or((0.0, 0.0));
        self.put_nominal(
            k,
            ticks,
            nominal,
            window.is_some(),
            (open, close),
            eps_ticks,
        );
        if k >= CHUNK {
            return;
        }
        if let Some((a, b)) = robust {
            self.ok[k] &= (a + b).is_finite();
        }
        self.robust[k] = robust.is_some();
        (self.r_open[k], self.r_close[k]) = robust.unwrap_or((0.0, 0.0));
    }

    /// Slot `k` without a robust window: aim and nominal aim (ticks),
    /// whether ZVS is possible and the window (second; ignored without
    /// ZVS, but counted in the test for numbers), bound (ticks); a refusal
    /// if any is not finite.
    #[inline(always)]
    pub fn put_nominal(
        &mut self,
        k: usize,
        ticks: f64,
        nominal: f64,
        zvs: bool,
        (open, close): (f64, f64),
        eps_ticks: f64,
    ) {
        // A sum is finite only where every term is (or, conservatively,
        // not where finite terms overflow): one test instead of five.
        let ok = (ticks + nominal + eps_ticks + open + close).is_finite();
        if k >= CHUNK {
            return;
        }
        self.ok[k] = ok;
        self.ticks[k] = ticks;
        self.nominal[k] = nominal;
        self.zvs[k] = zvs;
        (self.open[k], self.close[k]) = (open, close);
        self.robust[k] = false;
        self.eps[k] = eps_ticks;
    }
}
