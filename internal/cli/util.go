package cli

import "errors"

func asExit(err error, target **ExitError) bool { return errors.As(err, target) }
