;;; condhint.el --- Digits lost to rounding in Python code, via the condhint language server  -*- lexical-binding: t; -*-

;; Version: 0.1.0
;; Package-Requires: ((emacs "28.1"))
;; Keywords: languages, tools, python
;; SPDX-License-Identifier: MIT

;;; Commentary:

;; Registers the condhint language server (`condhint serve') with eglot for
;; `python-mode' and `python-ts-mode', and with lsp-mode when lsp-mode is loaded.
;; The server reports, per numeric expression, its condition number, the digits the
;; formula loses to rounding, and offers checked rewrites as quick fixes.
;;
;;   (require 'condhint)
;;   (add-hook 'python-mode-hook #'eglot-ensure)
;;
;; Settings are the `condhint-...' user options (M-x customize-group RET condhint);
;; they are sent as initializationOptions and answer the server's
;; workspace/configuration requests for the section "condhint".  A "condhint"
;; section in `eglot-workspace-configuration' (for example in .dir-locals.el) takes
;; precedence.  After changing an option, M-x condhint-reconfigure.

;;; Code:

(require 'cl-lib)
(require 'seq)
(require 'eieio)
(require 'eglot)

(defgroup condhint nil
  "Floating-point accuracy hints from the condhint language server."
  :group 'tools
  :prefix "condhint-")

(defcustom condhint-server-command '("condhint" "serve")
  "Command line that starts the condhint server, as a list of strings.
For a server installed in a virtual environment, for example
\\='(\"/path/to/venv/bin/python\" \"-m\" \"condhint\" \"serve\")."
  :type '(repeat string))

(defcustom condhint-major-modes '(python-mode python-ts-mode)
  "Major modes whose buffers the condhint server manages."
  :type '(repeat symbol))

(defcustom condhint-threshold-info 2
  "Digits lost from which a finding is reported as information."
  :type 'number)

(defcustom condhint-threshold-warning 4
  "Digits lost from which a finding is reported as a warning."
  :type 'number)

(defcustom condhint-threshold-error 8
  "Digits lost from which a finding is reported as an error."
  :type 'number)

(defcustom condhint-min-severity 'info
  "Lowest severity of the findings shown."
  :type '(choice (const info) (const warning) (const error)))

(defcustom condhint-inlay-hints nil
  "Non-nil asks the server for inlay hints (kappa and digits lost).
The client must support inlay hints too; eglot has them from version 1.10 on."
  :type 'boolean)

(defcustom condhint-default-range '(1e-6 1e6)
  "Range (LOW HIGH) assumed for inputs without a range comment or guard."
  :type '(list number number))

(defcustom condhint-samples 256
  "Number of sample points drawn over each expression's input ranges."
  :type 'natnum)

(defcustom condhint-debounce-ms 50
  "Milliseconds the server waits after the last edit before analysing again."
  :type 'natnum)

;; Each check: (OPTION DEFAULT PREDICATE EXPECTATION).  The defaults are those of
;; the server contract; an invalid value is replaced by its default.
(defconst condhint--checks
  `((condhint-threshold-info 2 condhint--digits-p "a number >= 0")
    (condhint-threshold-warning 4 condhint--digits-p "a number >= 0")
    (condhint-threshold-error 8 condhint--digits-p "a number >= 0")
    (condhint-default-range (1e-6 1e6) condhint--range-p
                            "a list (LOW HIGH) of finite numbers with LOW < HIGH")
    (condhint-samples 256 ,(lambda (v) (and (integerp v) (<= 8 v 100000)))
                      "an integer from 8 to 100000")
    (condhint-debounce-ms 50 ,(lambda (v) (and (integerp v) (<= 0 v 100000)))
                          "an integer from 0 to 100000")
    (condhint-min-severity info ,(lambda (v) (memq v '(info warning error)))
                           "one of info, warning, error")
    (condhint-inlay-hints nil ,(lambda (v) (memq v '(nil t))) "t or nil"))
  "Validation of the condhint user options.")

(defun condhint--digits-p (value)
  "Non-nil if VALUE is a number of digits (>= 0)."
  (and (numberp value) (>= value 0)))

(defun condhint--finite-p (value)
  "Non-nil if VALUE is a finite number."
  (and (numberp value) (not (isnan (float value))) (< (abs value) 1.0e+INF)))

(defun condhint--range-p (value)
  "Non-nil if VALUE is a list (LOW HIGH) of finite numbers with LOW < HIGH."
  (and (proper-list-p value) (= (length value) 2)
       (seq-every-p #'condhint--finite-p value)
       (< (car value) (cadr value))))

(defun condhint--checked-values ()
  "Alist (OPTION . VALUE) of valid values, and the list of problems found.
Returns (ALIST . PROBLEMS)."
  (let (values problems)
    (pcase-dolist (`(,var ,default ,ok ,expectation) condhint--checks)
      (let ((value (symbol-value var)))
        (if (funcall ok value)
            (push (cons var value) values)
          (push (format "%s must be %s; using %S" var expectation default) problems)
          (push (cons var default) values))))
    (let ((info (alist-get 'condhint-threshold-info values))
          (warning (alist-get 'condhint-threshold-warning values))
          (err (alist-get 'condhint-threshold-error values)))
      (unless (<= info warning err)
        (push (format "condhint thresholds must satisfy info <= warning <= error (got %s, %s, %s); using 2, 4, 8"
                      info warning err)
              problems)
        (setf (alist-get 'condhint-threshold-info values) 2
              (alist-get 'condhint-threshold-warning values) 4
              (alist-get 'condhint-threshold-error values) 8)))
    (cons values (nreverse problems))))

(defun condhint--problems ()
  "List of messages, one per invalid condhint user option."
  (cdr (condhint--checked-values)))

(defvar condhint--reported-problems nil
  "Problems already shown, so that each is shown once per session.")

(defun condhint-settings ()
  "The server's settings object (section \"condhint\") as a plist for JSON.
Invalid option values are reported with `display-warning' and replaced by
their defaults, so that the server always starts."
  (pcase-let ((`(,values . ,problems) (condhint--checked-values)))
    (dolist (problem problems)
      (unless (member problem condhint--reported-problems)
        (push problem condhint--reported-problems)
        (display-warning 'condhint problem :warning)))
    (let ((get (lambda (var) (alist-get var values))))
      (list :thresholds (list :info (funcall get 'condhint-threshold-info)
                              :warning (funcall get 'condhint-threshold-warning)
                              :error (funcall get 'condhint-threshold-error))
            :inlayHints (if (funcall get 'condhint-inlay-hints) t :json-false)
            :defaultRange (vconcat (funcall get 'condhint-default-range))
            :samples (funcall get 'condhint-samples)
            :debounceMs (funcall get 'condhint-debounce-ms)
            :minSeverity (symbol-name (funcall get 'condhint-min-severity))))))

(defun condhint--configuration-for (section)
  "Answer to a workspace/configuration item for SECTION, or nil if not ours."
  (let ((settings (condhint-settings)))
    (cond ((equal section "condhint") settings)
          ((and (stringp section) (string-prefix-p "condhint." section))
           (let ((node settings))
             (dolist (key (split-string (substring section (length "condhint.")) "\\."))
               (setq node (and (consp node) (plist-get node (intern (concat ":" key))))))
             node)))))

;;;; eglot

(defclass condhint-eglot-server (eglot-lsp-server) ()
  :documentation "Connection to a condhint language server.")

(cl-defmethod eglot-initialization-options ((_server condhint-eglot-server))
  "Send the condhint options as initializationOptions."
  (list :condhint (condhint-settings)))

(cl-defmethod eglot-handle-request
  ((_server condhint-eglot-server) (_method (eql 'workspace/configuration)) &key items)
  "Answer from the condhint options the ITEMS eglot's own configuration does not."
  (let ((answers (cl-call-next-method)))
    (apply #'vector
           (cl-loop for item across items
                    for answer across answers
                    collect (or answer
                                (condhint--configuration-for (plist-get item :section)))))))

(defun condhint-eglot-contact (&optional _interactive)
  "Contact for `eglot-server-programs': our server class and command."
  (cons 'condhint-eglot-server condhint-server-command))

(add-to-list 'eglot-server-programs (cons condhint-major-modes #'condhint-eglot-contact))

;;;; lsp-mode

(declare-function lsp-register-client "lsp-mode" (client))
(declare-function make-lsp-client "lsp-mode" (&rest args))
(declare-function lsp-stdio-connection "lsp-mode" (command &optional test-command))
(declare-function lsp-activate-on "lsp-mode" (&rest languages))
(declare-function lsp--set-configuration "lsp-mode" (settings))
(declare-function lsp-workspaces "lsp-mode" ())

(with-eval-after-load 'lsp-mode
  (lsp-register-client
   (make-lsp-client
    :new-connection (lsp-stdio-connection (lambda () condhint-server-command))
    :activation-fn (lsp-activate-on "python")
    :server-id 'condhint
    ;; Runs beside the user's main Python server rather than replacing it.
    :add-on? t
    :initialization-options (lambda () (list :condhint (condhint-settings)))
    :initialized-fn (lambda (_workspace)
                      (lsp--set-configuration (list :condhint (condhint-settings)))))))

;;;; Commands

;;;###autoload
(defun condhint-reconfigure ()
  "Send the current condhint options to the running server(s)."
  (interactive)
  (let ((params (list :settings (list :condhint (condhint-settings))))
        (sent 0))
    (when (featurep 'eglot)
      (let ((server (eglot-current-server)))
        (when (and server (object-of-class-p server 'condhint-eglot-server))
          (jsonrpc-notify server :workspace/didChangeConfiguration params)
          (cl-incf sent))))
    (when (featurep 'lsp-mode)
      (when (lsp-workspaces)
        (lsp--set-configuration (list :condhint (condhint-settings)))
        (cl-incf sent)))
    (message "condhint: settings sent to %d server(s)" sent)))

(provide 'condhint)
;;; condhint.el ends here
