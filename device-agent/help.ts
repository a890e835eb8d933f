/** The longer part of `ocellus-agent --help`: each driver and task source with a copy-paste example. */
export const HELP = `Drivers (--driver; device-agent/README.md has the whole walk-through):
  sim        simulated camera and accelerator (default; moves nothing)
  v4l2       a Linux (USB/UVC or CSI) camera through v4l2-ctl from Debian's v4l-utils
               ocellus-agent --config agent.json --driver v4l2 --v4l2-device /dev/video0
             reads the camera's control list at start; needs the device class's calibration tables
             (controls.focus for focus_absolute, controls.gain for gain/analogue_gain); reads every
             control back and fails the switch (restoring the previous profile) when the camera clamps
             or refuses a value beyond --v4l2-tolerance-pct (2)
  libcamera  a libcamera stack: writes LensPosition (dioptres), ExposureTime (µs), AnalogueGain,
             AfMode, AeEnable and FrameDurationLimits to a JSON file the camera process reads
               ocellus-agent --config agent.json --driver libcamera \\
                 --libcamera-controls-file /run/ocellus/camera-controls.json \\
                 --libcamera-applied-file /run/ocellus/camera-applied.json
  command    every step runs your program with the settings as JSON on stdin
               ocellus-agent --config agent.json --driver command \\
                 --camera-command "/opt/robot/bin/set-camera" --weights-command "/opt/robot/bin/load-model"
             exit code 0 = done; anything else fails the step (exit code and stderr are reported);
             --command-timeout-ms (10000) limits each run. --weights-command and --memory-command also
             serve the v4l2 and libcamera drivers; the weights step gets the verified local weights path.

Task sources (--task-source; the local control endpoint always stays):
  local      only the control endpoint (ocellus-agent task NAME)
  ros2       ROS 2 through rosbridge (rosbridge_server's WebSocket, v2 JSON protocol)
               ocellus-agent --config agent.json --task-source ros2 --rosbridge-url ws://127.0.0.1:9090 \\
                 --ros-task-topic /robot/task --ros-motion-topic /robot/moving --ros-status-topic /ocellus/status
             task: std_msgs/msg/String (the task name); motion: std_msgs/msg/Bool (true while moving);
             status: std_msgs/msg/String holding JSON (active task, profile revision, release, refusals)

Caution: changing perception settings on a moving robot can hide obstacles. Try a new camera or
driver on one unit first, use applyPolicy "when-idle" releases, and follow the site's risk assessment,
the robot safety standards and local regulations.`;
