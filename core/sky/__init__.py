"""Where the receiver is and what it sees: geometry and Doppler over (satellite, time),
passes above the mask."""
