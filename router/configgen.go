package router

// ConfigGeneration counts the router's configurations: 1 after New, one
// more after each successful Reconfigure. Together with a decision's
// Generation (the index) it names everything the decision, its chain
// distributions (ChainDists) and its error measure were computed from, so
// a cache kept outside the router (of rendered plans, for example) can key
// on it. O(1).
func (r *Router) ConfigGeneration() uint64 { return r.cfg.Load().gen }
