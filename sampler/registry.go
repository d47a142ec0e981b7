package sampler

// The term registry: every model term, once, in the order its parameters
// are reported (Layout.Params, State.Extract, draws.csv columns). Adding a
// term is one line here plus its own file (see DEVELOPERS.md, "Adding a
// model term").
//
// draw is the term's place in the order starting values and prior draws
// are taken from the chain's stream (0: it draws none); terms with draw
// below shardSplit start before the shard streams are split off the
// chain's stream. derived is its place among the derived quantities (0:
// none). Both orders are kept as they were when terms were first
// registered, so a seed gives the draws it always gave.
var registry = []registryEntry{
	{term: latentTerm{}},
	{term: thresholdTerm{}, draw: 1, derived: 3},
	{term: meanTerm{}, draw: 2},
	{term: interceptTerm{}, draw: 6, derived: 2},
	{term: growthTerm{}, draw: 9, derived: 6},
	{term: pathTerm{}, draw: 3, derived: 1},
	{term: dynamicTerm{}, draw: 10},
	{term: movingAverageTerm{}, draw: 7, derived: 5},
	{term: innovationTerm{}, draw: 4},
	{term: firstOccasionTerm{}, draw: 5},
	{term: transitionTerm{}, derived: 4},
	{term: effectTerm{}, derived: 7},
	{term: impulseTerm{}, derived: 8},
}

// shardSplit: terms whose draw rank is below it start before the shard
// streams are split off the chain's stream (see NewState).
const shardSplit = 2

type registryEntry struct {
	term          Term
	draw, derived int
}

// Sweep slots of the registered terms' blocks (Placed.Slot), in sweep
// order. A new term picks a free number between those it must follow and
// precede.
const (
	slotLatentPaths = 10 // LatentPathBlock (opt-in)
	slotLatent      = 20 // LatentBlock
	slotScale       = 30 // ScaleBlock
	slotThresholds  = 40 // ThresholdBlock
	slotLevel       = 50 // LevelBlock
	slotCollapsed   = 60 // CollapsedBlock
	slotIntercepts  = 70 // InterceptBlock
	slotLoadings    = 75 // LoadingBlock (lagged latent response)
	slotLocation    = 80 // LocationBlock
	slotMeans       = 90 // MeanBlock
	slotPaths       = 100
	slotShear       = 105 // LagShearBlock (lagged latent response)
	slotCov         = 110
	slotPsi         = 120
	slotInterweave  = 125 // InterweaveBlock
)
